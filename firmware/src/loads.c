#include "loads.h"
#include "config.h"
#include "tick.h"
#include <avr/io.h>
#include <util/atomic.h>
#if CC_LOAD
#include "cc_load.h"
#endif

#define LOAD_MASK (_BV(PB0) | _BV(PB1))
#if CC_LOAD
/* Charger enables: PD4 for channel 0, PD5 for channel 1. */
#define CHG_SHIFT 4
#define CHG_MASK (_BV(PD4) | _BV(PD5))
#define CHARGING() ((PORTD & CHG_MASK) >> CHG_SHIFT)
#else
#define CHARGING() 0
#endif

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
	uint8_t f = (loads_on(ch) ? 0x01 : 0) | ((cut_by_rig & _BV(ch)) ? 0x02 : 0);
#if CC_LOAD
	/* Protocol 1.1: bits 2-3 mode (1 constant current, 2 charge), bit 4 current into the
	 * cell, bit 5 the trim at its bound. */
	if (f & 0x01)
		f |= 0x04 | (cc_at_bound(ch) ? 0x20 : 0);
	else if (CHARGING() & _BV(ch))
		f |= 0x08 | 0x10;
#endif
	return f;
}

#if CC_LOAD
uint8_t loads_mode(uint8_t ch)
{
	return loads_on(ch) ? MODE_DISCHARGE : (CHARGING() & _BV(ch)) ? MODE_CHARGE : MODE_REST;
}

/* Break before make: whatever was on goes off before the other is switched on, so a load and
 * a charger are never on together, not even for an instruction. */
void loads_mode_set(uint8_t ch, uint8_t mode)
{
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE)
	{
		if (mode != MODE_DISCHARGE) {
			PORTB &= ~_BV(ch);
			cc_stop(ch);
		}
		if (mode != MODE_CHARGE)
			PORTD &= ~_BV(CHG_SHIFT + ch);
		if (mode != MODE_REST) {
			last_beat = tick_ms();
			cut_by_rig &= ~_BV(ch);
		}
		if (mode == MODE_DISCHARGE) {
			cc_start(ch);
			PORTB |= _BV(ch);
		} else if (mode == MODE_CHARGE) {
			PORTD |= _BV(CHG_SHIFT + ch);
		}
	}
}
#endif

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
	uint8_t on = (PORTB & LOAD_MASK) | CHARGING();
	/* Strictly more: last_beat was stamped up to 1 ms after the tick it reads, so this cuts
	 * between 5.000 and 5.001 s after the host's last word, never before. */
	if (on && now - last_beat > HEARTBEAT_TIMEOUT_MS) {
		PORTB &= ~LOAD_MASK;
#if CC_LOAD
		PORTD &= ~CHG_MASK;
		cc_stop(0);
		cc_stop(1);
#endif
		cut_by_rig |= on;
		beat_lost |= on;
	}
#if CC_LOAD
	cc_tick();
#endif
}
