/* The serial line: interrupt-driven, with ring buffers both ways. */
#ifndef UART_H
#define UART_H
#include <stdbool.h>
#include <stdint.h>

void uart_init(void);
/* Next received byte, or -1 when none is waiting. */
int16_t uart_read(void);
bool uart_rx_pending(void);
/* Queues bytes for sending; waits while the send buffer is full. */
void uart_write(const char *s, uint8_t n);

#endif
