/* Reference rig firmware for cellvigil: two discharge channels on an ATmega328P at 16 MHz,
 * speaking protocol v1 over the serial line. */
#include "adc.h"
#include "cc_load.h"
#include "config.h"
#include "loads.h"
#include "protocol.h"
#include "reset_cause.h"
#include "tick.h"
#include "uart.h"
#include <avr/interrupt.h>
#include <avr/io.h>
#include <avr/pgmspace.h>
#include <avr/sleep.h>
#include <avr/wdt.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

/* ADC inputs of each channel: voltage, current, thermistor, and (CC variant) the charger's
 * current monitor on ADC6 and ADC7, the analog-only inputs of the TQFP and QFN packages. */
static const uint8_t INPUTS[CHANNELS][4] = {{0, 1, 2, 6}, {3, 4, 5, 7}};

static uint16_t seq[CHANNELS];

/* Appends ",<value>" in decimal. */
static char *field(char *p, uint32_t value)
{
	*p++ = ',';
	ultoa(value, p, 10);
	return p + strlen(p);
}

#define TEXT(x) #x
#define NUMBER(x) TEXT(x)

static void send_hello(void)
{
	send_line_P(PSTR("H," RIG_ID "," FIRMWARE_VERSION "," NUMBER(ADC_BITS) "," NUMBER(CHANNELS)));
#if CC_LOAD
	/* Protocol 1.1: the capability lines follow the hello at once, before any other line. */
	send_line_P(PSTR("K,0,I," NUMBER(CC_MIN_COUNTS) "," NUMBER(CC_MAX_COUNTS) ",0,1"));
	send_line_P(PSTR("K,1,I," NUMBER(CC_MIN_COUNTS) "," NUMBER(CC_MAX_COUNTS) ",0,1"));
#endif
}

static void send_frame(uint8_t ch, uint32_t tick)
{
	uint8_t flags = loads_flags(ch);
	uint16_t v = adc_read12(INPUTS[ch][0]);
	/* While charging, i is the charger's current (flag bit 4 says it flows into the cell). */
	uint16_t i = adc_read12(INPUTS[ch][(flags & 0x10) ? 3 : 1]);
	uint16_t t = adc_read12(INPUTS[ch][2]);
	/* The flags are read again after the conversions: a load switched meanwhile reports its
	 * new state only in the next frame, never a current that does not match its flag. */
	if (loads_flags(ch) != flags)
		return;
#if CC_LOAD
	if (flags & 0x01)
		cc_trim(ch, i);
#endif
	char line[48] = "D";
	char *p = field(line + 1, ch);
	p = field(p, seq[ch]++);
	p = field(p, tick);
	p = field(p, v);
	p = field(p, i);
	p = field(p, t);
	*p++ = ',';
	*p++ = "0123456789ABCDEF"[flags >> 4];
	*p++ = "0123456789ABCDEF"[flags & 15];
	*p = 0;
	send_line(line);
}

/* An E line after boot when the reset was not a plain power-on, so the host can tell a hang
 * or a supply dip from someone plugging the board in. */
static void report_reset(uint8_t flags)
{
	if (flags & _BV(PORF))
		return;
	if (flags & _BV(WDRF)) {
		loads_mark_all_cut();
		send_line_P(PSTR("E,RST_WDT,reset by the hardware watchdog: the firmware hung"));
	} else if (flags & _BV(BORF)) {
		loads_mark_all_cut();
		send_line_P(PSTR("E,RST_BOR,reset by brown-out: the supply dipped"));
	} else if (flags & _BV(EXTRF)) {
		send_line_P(PSTR("E,RST_EXT,reset pin: the button, or the port opened with DTR"));
	} else {
		send_line_P(PSTR("E,RST_NONE,restart without a reset flag"));
	}
}

#if CC_LOAD
/* Switches a channel's mode, or says with an E line why not; false when refused. */
static bool switch_mode(uint8_t ch, uint8_t mode)
{
	if (mode == MODE_DISCHARGE && cc_target(ch) == 0) {
		send_line_P(PSTR("E,SETPOINT,no current set: send ISET before discharging"));
		return false;
	}
	loads_mode_set(ch, mode);
	return true;
}
#endif

static void answer(struct parsed p)
{
	char line[64];
	switch (p.cmd) {
	case CMD_NONE:
		return;
	case CMD_HELLO:
		send_hello();
		return;
	case CMD_BEAT:
		loads_heartbeat();
		return;
	case CMD_LOAD: {
#if CC_LOAD
		/* v1's LOAD on a CC channel: 1 discharges at the setpoint, 0 rests (charger off too). */
		uint8_t mode = p.on ? MODE_DISCHARGE : MODE_REST;
		bool changed = loads_mode(p.channel) != mode;
		if (!switch_mode(p.channel, mode))
			return;
#else
		bool changed = loads_on(p.channel) != p.on;
		loads_set(p.channel, p.on);
#endif
		strcpy(line, "A,LOAD");
		field(field(line + 6, p.channel), p.on);
		send_line(line);
		/* A frame at once after a switch, out of the regular period: the host then knows
		 * the moment of switching to within a few ms rather than a frame period, which over
		 * a short discharge is worth tenths of a percent of the capacity. */
		if (changed)
			send_frame(p.channel, tick_ms());
		return;
	}
#if CC_LOAD
	case CMD_MODE: {
		bool changed = loads_mode(p.channel) != p.on;
		if (!switch_mode(p.channel, p.on))
			return;
		strcpy(line, "A,MODE");
		char *q = field(line + 6, p.channel);
		*q++ = ',';
		*q++ = "RDC"[p.on];
		*q = 0;
		send_line(line);
		if (changed)
			send_frame(p.channel, tick_ms());
		return;
	}
	case CMD_ISET:
		if (p.value < CC_MIN_COUNTS || p.value > CC_MAX_COUNTS) {
			send_line_P(PSTR("E,RANGE,setpoint outside " NUMBER(CC_MIN_COUNTS) ".." NUMBER(
			    CC_MAX_COUNTS) " counts"));
			return;
		}
		cc_set_target(p.channel, p.value);
		strcpy(line, "A,ISET");
		field(field(line + 6, p.channel), p.value);
		send_line(line);
		return;
	case CMD_PSET:
		send_line_P(PSTR("E,CAPABLE,no constant power on this rig: use ISET"));
		return;
#endif
	case CMD_BAD:
		strcpy(line, "E,");
		strcat_P(line, p.error_code);
		strcat(line, ",");
		strcat_P(line, p.error_text);
		send_line(line);
		return;
	}
}

static void read_host(void)
{
	static char buf[LINE_MAX];
	static uint8_t len;
	int16_t c;
	while ((c = uart_read()) >= 0) {
		int16_t n = line_feed(buf, &len, (uint8_t)c);
		if (n < 0)
			send_line_P(PSTR("E,OVERLONG,line too long"));
		else if (n > 0)
			answer(parse_line(buf, (uint8_t)n));
	}
}

/* Idle until the next interrupt (the 1 ms tick at the latest) unless a byte is waiting;
 * checked with interrupts off so a byte arriving in between cannot be slept over. */
static void idle(void)
{
	cli();
	if (uart_rx_pending()) {
		sei();
		return;
	}
	sleep_enable();
	sei();
	sleep_cpu();
	sleep_disable();
}

int main(void)
{
	uint8_t flags = reset_flags();
	tick_init();
	uart_init();
	adc_init();
#if CC_LOAD
	cc_init();
#endif
	set_sleep_mode(SLEEP_MODE_IDLE);
	/* The hardware watchdog resets the chip when the main loop stops coming round. */
	wdt_enable(WDTO_500MS);
	sei();
	send_hello();
	report_reset(flags);

	/* Channel 1 samples half a period after channel 0, spreading the work. */
	uint32_t due[CHANNELS] = {FRAME_PERIOD_MS, FRAME_PERIOD_MS + FRAME_PERIOD_MS / 2};
	for (;;) {
		wdt_reset();
		read_host();
		uint8_t cut = loads_take_beat_lost();
		if (cut) {
			send_line_P(PSTR("E,BEAT_LOST,no heartbeat for 5 s: every load cut"));
			for (uint8_t ch = 0; ch < CHANNELS; ch++)
				if (cut & _BV(ch))
					send_frame(ch, tick_ms());
		}
		uint32_t now = tick_ms();
		for (uint8_t ch = 0; ch < CHANNELS; ch++) {
			if ((int32_t)(now - due[ch]) >= 0) {
				/* Frames keep their period; a late one does not shift the ones after it. */
				due[ch] += FRAME_PERIOD_MS;
				send_frame(ch, now);
			}
		}
		idle();
	}
}
