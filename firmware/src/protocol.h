/* Protocol v1 on the rig's side: framing lines with their CRC, and reading host commands. */
#ifndef PROTOCOL_H
#define PROTOCOL_H
#include <stdint.h>
#include "config.h"

/* Longest host line kept; the longest valid command, C,LOAD,15,1|XXXX, is 16 bytes. */
#define LINE_MAX 48

/* Sends `payload` (without CRC) as a line: payload, '|', CRC-16/IBM-3740 in hex, '\n'. */
void send_line(const char *payload);
/* The same for a payload kept in flash (PSTR), where constant text costs no RAM. */
void send_line_P(const char *payload);

/* What a host line asks for. */
enum command {
	CMD_NONE, /* an empty line */
	CMD_HELLO,
	CMD_BEAT,
	CMD_LOAD,
#if CC_LOAD
	CMD_MODE, /* protocol 1.1: `on` holds the mode */
	CMD_ISET, /* protocol 1.1: `value` holds the setpoint in counts */
	CMD_PSET, /* protocol 1.1: refused, the reference loads have no constant power */
#endif
	CMD_BAD /* answered with an E line: `error_code` and `error_text` say why */
};

struct parsed {
	enum command cmd;
	uint8_t channel;
	uint8_t on;
	uint16_t value;
	const char *error_code; /* both in flash */
	const char *error_text;
};

/* Reads one line (without its '\n'; a '\r' before it is tolerated). */
struct parsed parse_line(char *line, uint8_t len);

/* Feeds received bytes; returns a line's length once one is complete (the line is then in
 * `buf`), -1 when the line was too long (its bytes were dropped), 0 otherwise. */
int16_t line_feed(char *buf, uint8_t *len, uint8_t c);

#endif
