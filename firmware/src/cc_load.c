#include "config.h"
#if CC_LOAD
#include "cc_load.h"
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

void cc_init(void)
{
	/* Timer2 fast PWM (mode 3), no prescaler: 16 MHz / 256 = 62.5 kHz, far above the RC
	 * filter's corner. The outputs stay disconnected (COM2x = 0) until a channel discharges. */
	TCCR2A = _BV(WGM21) | _BV(WGM20);
	TCCR2B = _BV(CS20);
}

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
	ff_q8[ch] = steps_q8 > 256 + 65535u ? 65535u : steps_q8 < 256 ? 0 : (uint16_t)(steps_q8 - 256);
	/* A new setpoint while discharging: the trim learnt so far (the board's offsets) stays. */
	if (running & _BV(ch))
		apply(ch);
}

uint16_t cc_target(uint8_t ch)
{
	return target[ch];
}

void cc_start(uint8_t ch)
{
	trim_q8[ch] = 0;
	bound &= ~_BV(ch);
	apply(ch);
	ATOMIC_BLOCK(ATOMIC_RESTORESTATE)
	{
		if (ch == 0) {
			OCR2A = duty_q8[0] >> 8;
			TCCR2A |= _BV(COM2A1);
		} else {
			OCR2B = duty_q8[1] >> 8;
			TCCR2A |= _BV(COM2B1);
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
		} else {
			TCCR2A &= ~_BV(COM2B1);
			PORTD &= ~_BV(PD3);
		}
	}
}

void cc_trim(uint8_t ch, uint16_t measured)
{
	if (!(running & _BV(ch)))
		return;
	/* A quarter of the error per frame: settles in about a second, and averages the reading's
	 * noise (about one count) down to a fraction of a count. */
	int32_t err = (int32_t)target[ch] - measured;
	int32_t t = trim_q8[ch] + ((err * CC_Q8_PER_COUNT_Q8) >> 10);
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
			OCR2B = step;
	}
}
#endif
