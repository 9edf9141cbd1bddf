#include "loads.h"
#include "config.h"
#include "tick.h"
#include <avr/io.h>
#include <util/atomic.h>

#define LOAD_MASK (_BV(PB0) | _BV(PB1))

static volatile uint8_t cut_by_rig; /* bit per channel: flag bit 1 of its frames */
static volatile uint32_t last_beat;
static volatile uint8_t beat_lost; /* channels the heartbeat watchdog cut, not yet told */

/* The pins are made outputs, driven low, by the first instructions after reset (see
 * reset_cause.c); from then on only these functions and the watchdog touch PORTB0..1. */

void loads_set(uint8_t ch, bool on)
{
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE)
	{
		if (on) {
			/* Switching on counts as a heartbeat: the host is plainly there. */
			last_beat = tick_ms();
			cut_by_rig &= ~_BV(ch);
			PORTB |= _BV(ch);
		} else {
			PORTB &= ~_BV(ch);
		}
	}
}

bool loads_on(uint8_t ch)
{
	return (PORTB & _BV(ch)) != 0;
}

uint8_t loads_flags(uint8_t ch)
{
	return (loads_on(ch) ? 0x01 : 0) | ((cut_by_rig & _BV(ch)) ? 0x02 : 0);
}

void loads_mark_all_cut(void)
{
	cut_by_rig = LOAD_MASK;
}

void loads_heartbeat(void)
{
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE) { last_beat = tick_ms(); }
}

uint8_t loads_take_beat_lost(void)
{
	uint8_t was;
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE)
	{
		was = beat_lost;
		beat_lost = 0;
	}
	return was;
}

/* Every millisecond, from the timer interrupt: it keeps running when the main loop is stuck in
 * a long send, and the hardware watchdog covers the case where interrupts stop. */
void tick_hook(uint32_t now)
{
	uint8_t on = PORTB & LOAD_MASK;
	/* Strictly more: last_beat was stamped up to 1 ms after the tick it reads, so this cuts
	 * between 5.000 and 5.001 s after the host's last word, never before. */
	if (on && now - last_beat > HEARTBEAT_TIMEOUT_MS) {
		PORTB &= ~LOAD_MASK;
		cut_by_rig |= on;
		beat_lost |= on;
	}
}
