#include "config.h"
#if CC_LOAD
#include "cc_load.h"
#include "tick.h"
#include <avr/io.h>
#include <util/atomic.h>

/* Duty in 1/256 of a PWM step ("q8"): 0..65535 is 0..255 steps of OCR2x plus a fraction, which
 * the millisecond tick spreads over the steps (first-order sigma-delta); the RC filter in front
 * of the op-amp averages it. */
static volatile uint16_t duty_q8[CHANNELS];
static uint16_t ff_q8[CHANNELS];
static int16_t trim_q8[CHANNELS];
static uint16_t target[CHANNELS];
static uint8_t bound; /* bit per channel */
static volatile uint8_t running; /* bit per channel */
static uint8_t acc[CHANNELS];
/* Readings before this tick are not trimmed on: the filter is still settling to a new duty
 * (two stages of 47 ms reach 99.9 % of a step in 0.42 s), and a trim on them would overshoot. */
static uint32_t settled_at[CHANNELS];
#define SETTLE_MS 420

void cc_init(void)
{
	/* Channel 0 on Timer2 (OC2A, PB3), channel 1 on Timer1 (OC1B, PB2), both fast PWM with 8
	 * bits. Their clocks run only while a channel discharges (see cc_start) and the outputs
	 * stay disconnected (COM = 0) until then. */
	TCCR2A = _BV(WGM21) | _BV(WGM20);
	TCCR1A = _BV(WGM10);
}

/* Both clk/64: 16 MHz / 64 / 256 = 977 Hz, 290 times the corner of each of the filter's two RC
 * stages (3.4 Hz): the ripple left at the op-amp is under a hundredth of a PWM step. */
#define TIMER2_RUN _BV(CS22)
#define TIMER1_RUN (_BV(WGM12) | _BV(CS11) | _BV(CS10))

static void apply(uint8_t ch)
{
	int32_t d = (int32_t)ff_q8[ch] + trim_q8[ch];
	uint16_t v = d < 0 ? 0 : d > 65535 ? 65535 : (uint16_t)d;
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE) { duty_q8[ch] = v; }
}

void cc_set_target(uint8_t ch, uint16_t counts)
{
	target[ch] = counts;
	/* Counts per PWM step, from the parts (config.h): the duty (OCR + 1) / 256 of AVcc, times
	 * the divider, across the shunt, amplified and read against the same AVcc. */
	uint32_t steps_q8 = ((uint32_t)counts * CC_Q8_PER_COUNT_Q8) >> 8;
	ff_q8[ch] = steps_q8 > 65791UL ? 65535u : steps_q8 < 256 ? 0 : (uint16_t)(steps_q8 - 256);
	/* A new setpoint while discharging: the trim learnt so far (the board's offsets) stays. */
	if (running & _BV(ch)) {
		apply(ch);
		settled_at[ch] = tick_ms() + SETTLE_MS;
	}
}

uint16_t cc_target(uint8_t ch)
{
	return target[ch];
}

void cc_start(uint8_t ch)
{
	trim_q8[ch] = 0;
	bound &= ~_BV(ch);
	settled_at[ch] = tick_ms() + SETTLE_MS;
	apply(ch);
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE)
	{
		if (ch == 0) {
			TCCR2B = TIMER2_RUN;
			OCR2A = duty_q8[0] >> 8;
			TCCR2A |= _BV(COM2A1);
		} else {
			TCCR1B = TIMER1_RUN;
			OCR1B = duty_q8[1] >> 8;
			TCCR1A |= _BV(COM1B1);
		}
		running |= _BV(ch);
	}
}

void cc_stop(uint8_t ch)
{
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE)
	{
		running &= ~_BV(ch);
		if (ch == 0) {
			TCCR2A &= ~_BV(COM2A1);
			PORTB &= ~_BV(PB3);
			TCCR2B = 0;
		} else {
			TCCR1A &= ~_BV(COM1B1);
			PORTB &= ~_BV(PB2);
			TCCR1B = 0;
		}
	}
}

void cc_trim(uint8_t ch, uint16_t measured)
{
	if (!(running & _BV(ch)) || (int32_t)(tick_ms() - settled_at[ch]) < 0)
		return;
	/* A quarter of the error per frame: settles in about a second, and averages the reading's
	 * noise (about one count) down to a fraction of a count. */
	int32_t err = (int32_t)target[ch] - measured;
	int32_t t = trim_q8[ch] + ((err * (int32_t)CC_Q8_PER_COUNT_Q8) >> 10);
	bool at = false;
	if (t > CC_TRIM_MAX_Q8) {
		t = CC_TRIM_MAX_Q8;
		at = true;
	} else if (t < -CC_TRIM_MAX_Q8) {
		t = -CC_TRIM_MAX_Q8;
		at = true;
	}
	trim_q8[ch] = (int16_t)t;
	bound = at ? bound | _BV(ch) : bound & ~_BV(ch);
	apply(ch);
}

bool cc_at_bound(uint8_t ch)
{
	return (bound & _BV(ch)) != 0;
}

void cc_tick(void)
{
	for (uint8_t ch = 0; ch < CHANNELS; ch++) {
		if (!(running & _BV(ch)))
			continue;
		uint16_t d = duty_q8[ch];
		uint8_t step = d >> 8;
		uint16_t sum = (uint16_t)acc[ch] + (d & 0xff);
		acc[ch] = (uint8_t)sum;
		if (sum > 0xff && step < 255)
			step++;
		if (ch == 0)
			OCR2A = step;
		else
			OCR1B = step;
	}
}
#endif
