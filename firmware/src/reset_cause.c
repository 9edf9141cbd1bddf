#include "reset_cause.h"
#include <avr/io.h>
#include <avr/wdt.h>
#include "config.h"

/* Not cleared by the start-up code, so they survive until main reads them. */
static uint8_t saved_mcusr __attribute__((section(".noinit"), used));
static uint8_t saved_r2 __attribute__((section(".noinit"), used));

/* The very first instructions after the reset vector (.init0 runs before the stack and the
 * zero register are set up, so it is plain assembly): both load pins become outputs driven
 * low. A pin in reset is a floating input, which the gate's pull-down resistor holds low. It
 * also keeps r2, where newer Optiboot bootloaders leave the reset flags after clearing MCUSR
 * (from memory). */
void safe_pins_first(void) __attribute__((naked, used, section(".init0")));
void safe_pins_first(void)
{
	__asm__ volatile("cbi %[port], 0\n\t"
			 "cbi %[port], 1\n\t"
			 "sbi %[ddr], 0\n\t"
			 "sbi %[ddr], 1\n\t"
#if CC_LOAD
			 /* CC variant: both PWM setpoints (PB3, PB2) and both charger enables
			  * (PD4, PD5) as well, right after the loads. */
			 "cbi %[port], 3\n\t"
			 "cbi %[port], 2\n\t"
			 "sbi %[ddr], 3\n\t"
			 "sbi %[ddr], 2\n\t"
			 "cbi %[portd], 4\n\t"
			 "cbi %[portd], 5\n\t"
			 "sbi %[ddrd], 4\n\t"
			 "sbi %[ddrd], 5\n\t"
#endif
			 "sts saved_r2, r2\n\t" ::[port] "I"(_SFR_IO_ADDR(PORTB)),
			 [ddr] "I"(_SFR_IO_ADDR(DDRB)), [portd] "I"(_SFR_IO_ADDR(PORTD)),
			 [ddrd] "I"(_SFR_IO_ADDR(DDRD)));
}

/* After a watchdog reset the watchdog stays on at its shortest period (16 ms) and WDRF must be
 * cleared before it can be turned off, so this runs before the start-up code copies .data. */
void read_reset_flags(void) __attribute__((naked, used, section(".init3")));
void read_reset_flags(void)
{
	saved_mcusr = MCUSR;
	MCUSR = 0;
	wdt_disable();
}

uint8_t reset_flags(void)
{
	if (saved_mcusr)
		return saved_mcusr;
	/* Only a plausible flag set is taken from r2: anything in bits 4..7 means it is not one. */
	if (saved_r2 && (saved_r2 & 0xf0) == 0)
		return saved_r2;
	return 0;
}
