/* The chip's UART bridged to a pseudo-terminal of the harness's own, with bounded buffers. */
#ifndef LINK_H
#define LINK_H
#include <stdbool.h>
#include <stdint.h>
#include <simavr/sim_avr.h>

struct link_stats {
	uint64_t bytes_in, bytes_out, bytes_dropped;
	double last_host_byte_ms; /* emulated ms of the host's latest byte, -1 before any */
};

/* Opens the pseudo-terminal, links `link_path` to its device, hooks the UART's IRQs. */
int link_open(avr_t *avr, const char *link_path);
/* Moves bytes both ways; call every emulated millisecond. Returns true when host bytes came. */
bool link_poll(double now_ms);
/* The chip reset: its receiver is off until the firmware enables it again. */
void link_chip_reset(void);
const struct link_stats *link_stats(void);
void link_close(void);

#endif
