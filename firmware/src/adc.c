#include "adc.h"
#include <avr/interrupt.h>
#include <avr/io.h>
#include <avr/sleep.h>
#include <stdbool.h>

/* n extra bits need 4^n samples, summed and shifted right by n (oversampling and decimation);
 * it works because about one count of noise spreads each input over neighbouring codes. */
#define EXTRA_BITS 2
#define SAMPLES (1u << (2 * EXTRA_BITS))

void adc_init(void)
{
	/* Reference AVcc; clk/128 = 125 kHz, inside the 50-200 kHz the full 10 bits need. */
	ADMUX = _BV(REFS0);
	ADCSRA = _BV(ADEN) | _BV(ADIE) | _BV(ADPS2) | _BV(ADPS1) | _BV(ADPS0);
	DIDR0 = 0x3f; /* ADC0..5 are analog only: no digital input buffer drawing current */
}

static volatile bool done;

ISR(ADC_vect)
{
	done = true;
}

/* The CPU idles while the ADC converts (timer and UART keep running, which the deeper ADC noise
 * reduction mode would stop): less switching noise on the chip, and on an emulator the idle
 * time costs nothing. */
static uint16_t convert(void)
{
	done = false;
	ADCSRA |= _BV(ADSC);
	for (;;) {
		cli();
		if (done)
			break;
		sleep_enable();
		sei();
		sleep_cpu();
		sleep_disable();
	}
	sei();
	return ADC;
}

uint16_t adc_read12(uint8_t input)
{
	ADMUX = _BV(REFS0) | (input & 0x07);
	/* The first conversion after switching the multiplexer is thrown away: the sample-and-hold
	 * capacitor still carries some of the previous input. */
	(void)convert();
	uint16_t sum = 0;
	for (uint8_t i = 0; i < SAMPLES; i++)
		sum += convert();
	return sum >> EXTRA_BITS;
}
