#define _GNU_SOURCE
#include "link.h"
#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <simavr/avr_uart.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <unistd.h>

/* A byte the chip sends waits here until the pseudo-terminal takes it; past this (about 1.5 s of
 * frames) bytes are dropped and counted. While no host has the port open, everything is dropped,
 * as a USB serial adapter does: otherwise a host would open the port onto seconds of old frames. */
#define OUT_SIZE 1024
static uint8_t out_buf[OUT_SIZE];
static unsigned out_head, out_len;

/* Host bytes not yet taken by the UART. Only read from the terminal once this is empty, so a
 * host that writes faster than the chip reads is held back by the kernel's buffer. */
static uint8_t in_buf[256];
static unsigned in_pos, in_len;

static int master = -1;
static char link_path_copy[512];
static bool uart_ready; /* the UART's receive FIFO has room (its XON/XOFF IRQs) */
static avr_irq_t *uart_input;
static struct link_stats stats = {0, 0, 0, -1};

static void on_output(avr_irq_t *irq, uint32_t value, void *param)
{
	(void)irq;
	(void)param;
	if (out_len == OUT_SIZE) {
		stats.bytes_dropped++;
		return;
	}
	out_buf[(out_head + out_len) % OUT_SIZE] = (uint8_t)value;
	out_len++;
}

static void on_xon(avr_irq_t *irq, uint32_t value, void *param)
{
	(void)irq;
	(void)value;
	(void)param;
	uart_ready = true;
}

static void on_xoff(avr_irq_t *irq, uint32_t value, void *param)
{
	(void)irq;
	(void)param;
	if (value)
		uart_ready = false;
}

int link_open(avr_t *avr, const char *link_path)
{
	master = posix_openpt(O_RDWR | O_NOCTTY | O_NONBLOCK);
	if (master < 0 || grantpt(master) || unlockpt(master))
		return -1;
	const char *dev = ptsname(master);
	/* Raw from the start, for a host that does not set the mode itself. The other end is then
	 * closed again: the master reports a hang-up while no host holds it, which is how the
	 * harness knows whether anyone listens. */
	int slave = open(dev, O_RDWR | O_NOCTTY | O_NONBLOCK);
	struct termios t;
	if (slave < 0 || tcgetattr(slave, &t))
		return -1;
	cfmakeraw(&t);
	tcsetattr(slave, TCSANOW, &t);
	close(slave);
	snprintf(link_path_copy, sizeof link_path_copy, "%s", link_path);
	unlink(link_path);
	if (symlink(dev, link_path))
		return -1;

	/* Neither sleep on status polls (a real usleep per read) nor echo to stdout. */
	uint32_t flags = 0;
	avr_ioctl(avr, AVR_IOCTL_UART_SET_FLAGS('0'), &flags);
	avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUTPUT),
				on_output, NULL);
	avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUT_XON),
				on_xon, NULL);
	avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUT_XOFF),
				on_xoff, NULL);
	uart_input = avr_io_getirq(avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_INPUT);
	return 0;
}

static bool host_present(void)
{
	struct pollfd p = {master, POLLIN, 0};
	return poll(&p, 1, 0) >= 0 && !(p.revents & POLLHUP);
}

bool link_poll(double now_ms)
{
	if (!host_present()) {
		stats.bytes_dropped += out_len;
		out_len = 0;
		in_pos = in_len = 0;
		return false;
	}
	while (out_len) {
		unsigned run = out_head + out_len > OUT_SIZE ? OUT_SIZE - out_head : out_len;
		ssize_t n = write(master, out_buf + out_head, run);
		if (n <= 0)
			break; /* EAGAIN: the terminal is full; try again next millisecond */
		out_head = (out_head + (unsigned)n) % OUT_SIZE;
		out_len -= (unsigned)n;
		stats.bytes_out += (uint64_t)n;
	}
	bool heard = false;
	if (in_pos == in_len) {
		ssize_t n = read(master, in_buf, sizeof in_buf);
		if (n > 0) {
			in_pos = 0;
			in_len = (unsigned)n;
			stats.bytes_in += (uint64_t)n;
			stats.last_host_byte_ms = now_ms;
			heard = true;
		}
	}
	/* The UART paces what it gives the firmware to its baud rate; it says XOFF when full. */
	while (uart_ready && in_pos < in_len)
		avr_raise_irq(uart_input, in_buf[in_pos++]);
	return heard;
}

void link_chip_reset(void)
{
	uart_ready = false;
}

const struct link_stats *link_stats(void)
{
	return &stats;
}

void link_close(void)
{
	if (link_path_copy[0])
		unlink(link_path_copy);
	if (master >= 0)
		close(master);
}
