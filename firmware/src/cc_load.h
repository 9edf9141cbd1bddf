/* The constant-current load of the CC variant (make VARIANT=cc): a PWM setpoint from Timer2,
 * filtered to a voltage at the non-inverting input of the op-amp that drives each channel's
 * MOSFET, so the analog loop holds the current; the firmware only trims the duty, slowly, from
 * the current it measures. See docs/firmware.md and docs/firmware-wiring.md. */
#ifndef CC_LOAD_H
#define CC_LOAD_H
#include <stdbool.h>
#include <stdint.h>

void cc_init(void);
/* The target in counts of the channel's current input (the protocol's ISET); 0: none given. */
void cc_set_target(uint8_t ch, uint16_t counts);
uint16_t cc_target(uint8_t ch);
/* Starts the PWM at the feed-forward duty of the target; the trim starts from zero. */
void cc_start(uint8_t ch);
/* The PWM output disconnected and its pin low: a zero setpoint. Safe from an interrupt. */
void cc_stop(uint8_t ch);
/* One step of the integral trim from a fresh current reading of a discharging channel. */
void cc_trim(uint8_t ch, uint16_t measured);
/* The trim sits at its bound: the loop cannot reach the target (flag bit 5). */
bool cc_at_bound(uint8_t ch);
/* Every millisecond from the timer interrupt: dithers the duty's fraction into the 8-bit PWM. */
void cc_tick(void);

#endif
