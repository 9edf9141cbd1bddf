#include "tick.h"
#include <avr/interrupt.h>
#include <avr/io.h>
#include <util/atomic.h>

static volatile uint32_t ms;

void tick_init(void)
{
	/* CTC, clk/64, 250 counts: 16 MHz / 64 / 250 = 1000 Hz exactly. */
	TCCR0A = _BV(WGM01);
	TCCR0B = _BV(CS01) | _BV(CS00);
	OCR0A = 249;
	TIMSK0 = _BV(OCIE0A);
}

uint32_t tick_ms(void)
{
	uint32_t t;
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE) { t = ms; }
	return t;
}

ISR(TIMER0_COMPA_vect)
{
	ms++;
	tick_hook(ms);
}
