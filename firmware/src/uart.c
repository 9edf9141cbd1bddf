#include "uart.h"
#include "config.h"
#include <avr/interrupt.h>
#include <avr/io.h>
#include <util/atomic.h>
#include <util/setbaud.h>

/* Powers of two, so the indices wrap with a mask. The send buffer holds several frames: the
 * main loop queues a frame and goes back to sampling while the interrupt sends it. */
#define RX_SIZE 128
#define TX_SIZE 256

static volatile uint8_t rx_buf[RX_SIZE];
static volatile uint8_t rx_head, rx_tail;
static volatile uint8_t tx_buf[TX_SIZE];
static volatile uint8_t tx_head, tx_tail;

void uart_init(void)
{
	UBRR0H = UBRRH_VALUE;
	UBRR0L = UBRRL_VALUE;
#if USE_2X
	UCSR0A = _BV(U2X0);
#else
	UCSR0A = 0;
#endif
	UCSR0C = _BV(UCSZ01) | _BV(UCSZ00); /* 8N1 */
	UCSR0B = _BV(RXEN0) | _BV(TXEN0) | _BV(RXCIE0);
}

ISR(USART_RX_vect)
{
	uint8_t c = UDR0;
	uint8_t next = (rx_head + 1) & (RX_SIZE - 1);
	/* A full buffer drops the byte: the line it belonged to fails its CRC and gets an E. */
	if (next != rx_tail) {
		rx_buf[rx_head] = c;
		rx_head = next;
	}
}

ISR(USART_UDRE_vect)
{
	if (tx_head == tx_tail) {
		UCSR0B &= ~_BV(UDRIE0);
		return;
	}
	UDR0 = tx_buf[tx_tail];
	tx_tail = (tx_tail + 1) & (TX_SIZE - 1);
}

int16_t uart_read(void)
{
	if (rx_head == rx_tail)
		return -1;
	uint8_t c = rx_buf[rx_tail];
	rx_tail = (rx_tail + 1) & (RX_SIZE - 1);
	return c;
}

bool uart_rx_pending(void)
{
	return rx_head != rx_tail;
}

void uart_write(const char *s, uint8_t n)
{
	while (n--) {
		uint8_t next = (tx_head + 1) & (TX_SIZE - 1);
		while (next == tx_tail)
			; /* the interrupt is sending; it frees a byte every 40 us at 250 000 baud */
		tx_buf[tx_head] = (uint8_t)*s++;
		tx_head = next;
		UCSR0B |= _BV(UDRIE0);
	}
}
