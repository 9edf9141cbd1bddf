#include "protocol.h"
#include "config.h"
#include "uart.h"
#include <stdbool.h>
#include <avr/pgmspace.h>
#include <string.h>
#include <util/crc16.h>

static const char HEX[] = "0123456789ABCDEF";

/* CRC-16/IBM-3740: avr-libc's XMODEM step (poly 0x1021, not reflected) from 0xFFFF. */
static uint16_t crc16(const char *s, uint8_t n)
{
	uint16_t crc = 0xffff;
	while (n--)
		crc = _crc_xmodem_update(crc, (uint8_t)*s++);
	return crc;
}

void send_line(const char *payload)
{
	uint8_t n = (uint8_t)strlen(payload);
	uint16_t crc = crc16(payload, n);
	char tail[7] = {'|', HEX[crc >> 12], HEX[(crc >> 8) & 15], HEX[(crc >> 4) & 15],
			HEX[crc & 15], '\n', 0};
	uart_write(payload, n);
	uart_write(tail, 6);
}

void send_line_P(const char *payload)
{
	char line[64];
	strncpy_P(line, payload, sizeof line - 1);
	line[sizeof line - 1] = 0;
	send_line(line);
}

static int8_t hex_digit(char c)
{
	if (c >= '0' && c <= '9')
		return c - '0';
	if (c >= 'A' && c <= 'F')
		return c - 'A' + 10;
	if (c >= 'a' && c <= 'f')
		return c - 'a' + 10;
	return -1;
}

/* The four hex digits after the last '|' must equal the CRC of everything before it. */
static bool crc_ok(const char *line, uint8_t len, uint8_t *payload_len)
{
	if (len < 5 || line[len - 5] != '|')
		return false;
	uint16_t want = 0;
	for (uint8_t i = len - 4; i < len; i++) {
		int8_t d = hex_digit(line[i]);
		if (d < 0)
			return false;
		want = (uint16_t)(want << 4) | (uint8_t)d;
	}
	*payload_len = len - 5;
	return crc16(line, len - 5) == want;
}

static struct parsed bad(const char *code, const char *text)
{
	struct parsed p = {CMD_BAD, 0, 0, 0, code, text};
	return p;
}

/* A channel number, 0..15 in the protocol; -1 when not a number in that range. */
static int8_t channel_field(const char *s)
{
	uint8_t n = (uint8_t)strlen(s);
	if (n == 0 || n > 2)
		return -1;
	uint8_t v = 0;
	for (uint8_t i = 0; i < n; i++) {
		if (s[i] < '0' || s[i] > '9')
			return -1;
		v = (uint8_t)(v * 10 + (s[i] - '0'));
	}
	return v <= 15 ? (int8_t)v : -1;
}

struct parsed parse_line(char *line, uint8_t len)
{
	struct parsed p = {CMD_NONE, 0, 0, 0, 0, 0};
	if (len && line[len - 1] == '\r')
		len--;
	if (len == 0)
		return p;
	uint8_t n;
	if (!crc_ok(line, len, &n))
		return bad(PSTR("CRC"), PSTR("bad or missing checksum"));
	line[n] = 0;
	if (strcmp(line, "C,HELLO") == 0) {
		p.cmd = CMD_HELLO;
		return p;
	}
	if (strcmp(line, "C,BEAT") == 0) {
		p.cmd = CMD_BEAT;
		return p;
	}
	bool load = strncmp(line, "C,LOAD,", 7) == 0;
#if CC_LOAD
	bool mode = strncmp(line, "C,MODE,", 7) == 0;
	bool iset = strncmp(line, "C,ISET,", 7) == 0;
	if (!load && !mode && !iset && strncmp(line, "C,PSET,", 7) != 0)
		return bad(PSTR("SYNTAX"), PSTR("unknown command"));
#else
	if (!load)
		return bad(PSTR("SYNTAX"), PSTR("unknown command"));
#endif
	char *ch = line + 7;
	char *comma = strchr(ch, ',');
	if (!comma)
		return load ? bad(PSTR("SYNTAX"), PSTR("LOAD needs a channel and 0 or 1"))
			    : bad(PSTR("SYNTAX"), PSTR("a command needs a channel and a value"));
	*comma = 0;
	const char *arg = comma + 1;
	int8_t c = channel_field(ch);
	if (c < 0)
		return load ? bad(PSTR("RANGE"), PSTR("channel 0..15 and state 0 or 1"))
			    : bad(PSTR("RANGE"), PSTR("channel 0..15"));
	p.channel = (uint8_t)c;
	if (load) {
		if (strcmp(arg, "0") != 0 && strcmp(arg, "1") != 0)
			return bad(PSTR("RANGE"), PSTR("channel 0..15 and state 0 or 1"));
		p.cmd = CMD_LOAD;
		p.on = arg[0] == '1';
	}
#if CC_LOAD
	else if (mode) {
		static const char MODES[] = "RDC"; /* in the order MODE_REST, _DISCHARGE, _CHARGE */
		const char *m = arg[0] ? strchr(MODES, arg[0]) : 0;
		if (!m || arg[1])
			return bad(PSTR("RANGE"), PSTR("mode R, D or C"));
		p.cmd = CMD_MODE;
		p.on = (uint8_t)(m - MODES);
	} else {
		uint8_t n = (uint8_t)strlen(arg);
		uint32_t v = 0;
		for (uint8_t i = 0; i < n; i++) {
			if (arg[i] < '0' || arg[i] > '9' || n > 5 || (i == 0 && arg[0] == '0' && n > 1))
				return bad(PSTR("RANGE"), PSTR("a setpoint is a count 0..65535"));
			v = v * 10 + (uint8_t)(arg[i] - '0');
		}
		if (n == 0 || v > 65535)
			return bad(PSTR("RANGE"), PSTR("a setpoint is a count 0..65535"));
		p.cmd = iset ? CMD_ISET : CMD_PSET;
		p.value = (uint16_t)v;
	}
#endif
	if (c >= CHANNELS)
		return bad(PSTR("CHANNEL"), PSTR("no such channel on this rig"));
	return p;
}

int16_t line_feed(char *buf, uint8_t *len, uint8_t c)
{
	static bool overlong;
	if (c == '\n') {
		uint8_t n = *len;
		*len = 0;
		if (overlong) {
			overlong = false;
			return -1;
		}
		buf[n] = 0;
		return n == 0 ? 0 : n;
	}
	if (overlong)
		return 0;
	if (*len >= LINE_MAX - 1) {
		overlong = true;
		*len = 0;
		return 0;
	}
	buf[(*len)++] = (char)c;
	return 0;
}
