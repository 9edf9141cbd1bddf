/* Emulated rig for end-to-end tests: the reference firmware's ELF on simavr's ATmega328P, its
 * UART on a pseudo-terminal, and an analog world behind its ADC pins and load pins.
 *
 *   rig-harness --elf cellvigil-rig.elf --link /tmp/rig --truth truth.json [options]
 *
 * Standard input takes control lines: "hang" (the firmware stops in a loop with interrupts
 * off), "ambient <C>" (the air around both cells), "leak <ch> <ohm>" (a soft internal short in
 * that channel's cell, 0 to clear it), "quit". The harness also quits when its
 * standard input closes, so a test that dies takes it along. */
#define _GNU_SOURCE
#include "link.h"
#include "world.h"
#include <fcntl.h>
#include <getopt.h>
#include <math.h>
#include <signal.h>
#include <simavr/avr_adc.h>
#include <simavr/sim_avr.h>
#include <simavr/sim_elf.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#define F_CPU 16000000u
#define PORTB_ADDR 0x25 /* data-space address of PORTB */
#define DDRB_ADDR 0x24
#define MCUSR_ADDR 0x54
#define LOAD_PINS 0x03	/* PB0: channel 0, PB1: channel 1 */
/* The CC variant's pins and Timer2 (ATmega328P data-space addresses) */
#define PORTD_ADDR 0x2B
#define CHARGER_PINS 0x30 /* PD4: channel 0, PD5: channel 1 */
#define TCCR2A_ADDR 0xB0
#define OCR2A_ADDR 0xB3
#define TCCR1A_ADDR 0x80
#define OCR1BL_ADDR 0x8A

static avr_t *avr;
static struct channel ch[2];
static volatile sig_atomic_t stop;
static uint64_t rng_state = 0x9e3779b97f4a7c15u;

static struct {
	const char *elf, *link, *truth;
	double speed, stop_after_s;
	bool hold;
} opt = {NULL, NULL, NULL, 1.0, 0, false};

static struct {
	double max_lag_ms, sum_lag_ms;
	uint64_t ticks;
	struct timespec t0;
	bool booted;
} pace;

#define RESETS_MAX 16
static struct {
	double at_ms;
	const char *cause;
	long driven_after; /* cycles until both load pins were driven outputs, -1 while not yet */
} resets[RESETS_MAX];
static unsigned nresets;
/* Cycles from power-on until the firmware drove both load pins, -1 while not yet. */
static long boot_driven_after = -1;
/* CC variant: the same for both setpoint pins (PB2, PB3) and both charger pins (PD4, PD5). */
static long boot_cc_driven_after = -1;
#define DDRD_ADDR 0x2A
static avr_cycle_count_t last_reset_cycle;
static bool reset_pending;
static double hung_at_ms = -1;
static void (*core_reset)(avr_t *);

static double emulated_ms(void)
{
	return (double)avr->cycle * 1000.0 / F_CPU;
}

static double real_ms(void)
{
	struct timespec t;
	clock_gettime(CLOCK_MONOTONIC, &t);
	return (t.tv_sec - pace.t0.tv_sec) * 1e3 + (t.tv_nsec - pace.t0.tv_nsec) / 1e6;
}

/* Gaussian noise (xorshift64 and Box-Muller): the seed makes a run repeatable. */
static double gauss(void)
{
	double u[2];
	for (int k = 0; k < 2; k++) {
		rng_state ^= rng_state << 13;
		rng_state ^= rng_state >> 7;
		rng_state ^= rng_state << 17;
		u[k] = ((rng_state >> 11) + 0.5) / 9007199254740992.0;
	}
	return sqrt(-2 * log(u[0])) * cos(2 * M_PI * u[1]);
}

static double world_ms;

/* The CC variant's PWM pins (OC2A on PB3 for channel 0, OC1B on PB2 for channel 1) as their mean voltage over the millisecond: fast PWM gives
 * (OCR + 1) / 256 of the supply while the output compare drives the pin, else the pin's level.
 * The firmware changes OCR only on the millisecond tick, so one look per millisecond sees
 * every value it sets. */
static void read_pwm(void)
{
	const struct {
		uint8_t tccr, com_bit, ocr, bit;
	} pin[2] = {{TCCR2A_ADDR, 0x80, OCR2A_ADDR, 3}, {TCCR1A_ADDR, 0x20, OCR1BL_ADDR, 2}};
	for (int k = 0; k < 2; k++) {
		double duty = (avr->data[pin[k].tccr] & pin[k].com_bit)
				      ? (avr->data[pin[k].ocr] + 1) / 256.0
				      : (avr->data[PORTB_ADDR] >> pin[k].bit) & 1;
		ch[k].pwm_v = duty * AVCC_V;
	}
}

static void advance_world(double now_ms)
{
	double dt = now_ms - world_ms;
	if (dt <= 0)
		return;
	for (int k = 0; k < 2; k++)
		channel_step(&ch[k], now_ms, dt);
	world_ms = now_ms;
}

/* The ADC asks for its input when a conversion starts; each answer carries fresh noise of about
 * one 10-bit count, which is what lets oversampling add resolution. simavr takes millivolts. */
static void on_adc_trigger(avr_irq_t *irq, uint32_t value, void *param)
{
	(void)irq;
	(void)param;
	union {
		avr_adc_mux_t mux;
		uint32_t v;
	} e = {.v = value};
	if (e.mux.kind != ADC_MUX_SINGLE || e.mux.src > 7)
		return;
	/* ADC0..5: three inputs per channel; ADC6 and ADC7: the chargers' current monitors */
	int k = e.mux.src < 6 ? e.mux.src / 3 : e.mux.src - 6;
	int which = e.mux.src < 6 ? e.mux.src % 3 : 3;
	double v = channel_pin_v(&ch[k], which) + gauss() * (AVCC_V / 1024);
	uint32_t mv = v <= 0 ? 0 : (uint32_t)lround(v * 1000);
	avr_raise_irq(avr_io_getirq(avr, AVR_IOCTL_ADC_GETIRQ, ADC_IRQ_ADC0 + e.mux.src), mv);
}

/* simavr clears the registers at every reset (the watchdog's included) but sets the reset
 * flags only after this hook; the main loop reads them once the reset is done. The analog
 * model is stepped from the main loop rather than by cycle timers, which a reset would drop. */
static void on_reset(avr_t *a)
{
	if (core_reset)
		core_reset(a);
	reset_pending = true;
}

static void note_reset(void)
{
	uint8_t f = avr->data[MCUSR_ADDR];
	const char *cause = f & 0x08 ? "watchdog" : f & 0x04 ? "brown-out" : f & 0x02 ? "external" : "power-on";
	if (nresets < RESETS_MAX)
		resets[nresets++] = (typeof(resets[0])){emulated_ms(), cause, -1};
	last_reset_cycle = avr->cycle;
	link_chip_reset();
}

static void sleep_not(avr_t *a, avr_cycle_count_t how_long)
{
	(void)a;
	(void)how_long;
}

static uint32_t symbol_addr(elf_firmware_t *fw, const char *name)
{
	for (uint32_t i = 0; i < fw->symbolcount; i++)
		if (!strcmp(fw->symbol[i]->symbol, name))
			return fw->symbol[i]->addr;
	return 0;
}

static void write_channel(FILE *f, const struct channel *c)
{
	fprintf(f,
		"{\"load_on\":%s,\"soc\":%.6f,\"current_A\":%.6f,\"terminal_V\":%.6f,"
		"\"temperature_C\":%.4f,\"charge_Ah\":%.9f,\"energy_Wh\":%.9f,\"load_on_s\":%.4f,"
		"\"hot_at_ms\":%.1f,\"segments_dropped\":%u,\"leak_ohm\":%g,\"leaked_Ah\":%.9f,",
		c->load ? "true" : "false", c->soc, c->current_a, c->terminal_v, c->temp_c,
		c->charge_as / 3600, c->energy_ws / 3600, c->load_on_s, c->hot_at_ms, c->seg_dropped,
		c->leak_ohm, c->leaked_as / 3600);
	static const char *const MODES[] = {"rest", "discharge", "charge"};
	static const char *const PHASES[] = {"off", "cc", "cv", "done"};
	fprintf(f,
		"\"charger_on\":%s,\"charge_phase\":\"%s\",\"load_A\":%.6f,\"charger_A\":%.6f,"
		"\"charged_Ah\":%.9f,\"charge_on_s\":%.4f,\"both_on_ms\":%.3f,\"setpoint_rc_V\":%.6f,"
		"\"segments\":[",
		c->charger_on ? "true" : "false", PHASES[c->phase], c->load_a, c->charger_a,
		c->charged_as / 3600, c->charge_on_s, c->both_on_ms, c->rc_v);
	for (unsigned i = 0; i < c->nseg; i++) {
		const struct segment *s = &c->seg[i];
		double span = s->to_ms - s->from_ms;
		double d = span > 0 ? span : 1;
		fprintf(f, "%s{\"from_ms\":%.3f,\"from_real_ms\":%.3f,\"to_ms\":%.3f,\"load\":%s,\"mode\":\"%s\",\"phase\":\"%s\",\"mean_A\":%.7f,\"mean_V\":%.7f,\"mean_C\":%.4f}",
			i ? "," : "", s->from_ms, s->from_real_ms, s->to_ms, s->load ? "true" : "false",
			MODES[s->mode], PHASES[s->phase], s->sum_a / d, s->sum_v / d, s->sum_c / d);
	}
	fprintf(f, "]}");
}

/* Written whole to a temporary file and renamed, so a reader never sees half of it. */
static void write_truth(void)
{
	char tmp[600];
	snprintf(tmp, sizeof tmp, "%s.tmp", opt.truth);
	FILE *f = fopen(tmp, "w");
	if (!f)
		return;
	const struct link_stats *l = link_stats();
	double real = pace.booted ? real_ms() : 0;
	fprintf(f, "{\"emulated_ms\":%.3f,\"real_ms\":%.3f,\"cycles\":%llu,", emulated_ms(), real,
		(unsigned long long)avr->cycle);
	fprintf(f, "\"pace\":{\"speed\":%g,\"max_lag_ms\":%.3f,\"mean_lag_ms\":%.4f},", opt.speed,
		pace.max_lag_ms, pace.ticks ? pace.sum_lag_ms / pace.ticks : 0);
	fprintf(f, "\"link\":{\"bytes_in\":%llu,\"bytes_out\":%llu,\"bytes_dropped\":%llu,\"last_host_byte_ms\":%.3f},",
		(unsigned long long)l->bytes_in, (unsigned long long)l->bytes_out,
		(unsigned long long)l->bytes_dropped, l->last_host_byte_ms);
	fprintf(f, "\"hung_at_ms\":%.3f,\"boot_pins_driven_after_cycles\":%ld,\"boot_cc_pins_driven_after_cycles\":%ld,\"resets\":[",
		hung_at_ms, boot_driven_after, boot_cc_driven_after);
	for (unsigned i = 0; i < nresets; i++)
		fprintf(f, "%s{\"at_ms\":%.3f,\"cause\":\"%s\",\"pins_driven_after_cycles\":%ld}", i ? "," : "",
			resets[i].at_ms, resets[i].cause, resets[i].driven_after);
	fprintf(f, "],\"channels\":[");
	write_channel(f, &ch[0]);
	fputc(',', f);
	write_channel(f, &ch[1]);
	fprintf(f, "]}\n");
	fclose(f);
	rename(tmp, opt.truth);
}

static void control(uint32_t exit_pc)
{
	static char line[128];
	static size_t len;
	char c;
	ssize_t n;
	while ((n = read(STDIN_FILENO, &c, 1)) == 1) {
		if (c != '\n') {
			if (len < sizeof line - 1)
				line[len++] = c;
			continue;
		}
		line[len] = 0;
		len = 0;
		double x;
		int k;
		if (!strcmp(line, "hang") && exit_pc) {
			/* avr-libc's _exit: cli, then a jump to itself. The firmware is stuck with its
			 * interrupts off, as after a runaway pointer; only the watchdog gets it out. */
			avr->pc = exit_pc;
			hung_at_ms = emulated_ms();
		} else if (sscanf(line, "ambient %lf", &x) == 1) {
			ch[0].ambient_c = ch[1].ambient_c = x;
		} else if (sscanf(line, "leak %d %lf", &k, &x) == 2 && k >= 0 && k < 2) {
			advance_world(emulated_ms());
			channel_leak(&ch[k], x);
		} else if (!strcmp(line, "quit")) {
			stop = 1;
		}
	}
	if (n == 0)
		stop = 1; /* standard input closed: whoever started us is gone */
}

/* Keeps emulated time on real time (times `speed`); without it an idle firmware runs hundreds
 * of times faster, and the host, which stamps frames by its own clock, would see a cell
 * drained in seconds. The lag is how far emulation fell behind, for the tests to check. */
static void pace_tick(void)
{
	if (opt.speed <= 0)
		return;
	double target = emulated_ms() / opt.speed;
	double lag = real_ms() - target;
	if (lag < -1.0) {
		struct timespec d = {0, (long)(-lag * 1e6)};
		nanosleep(&d, NULL);
		lag = real_ms() - target;
	}
	if (lag > pace.max_lag_ms)
		pace.max_lag_ms = lag;
	pace.sum_lag_ms += lag > 0 ? lag : -lag;
	pace.ticks++;
}

static void on_signal(int sig)
{
	(void)sig;
	stop = 1;
}

static double arg_double(const char *s, const char *what)
{
	char *end;
	double v = strtod(s, &end);
	if (*s == 0 || *end != 0) {
		fprintf(stderr, "rig-harness: %s wants a number, got '%s'\n", what, s);
		exit(2);
	}
	return v;
}

int main(int argc, char **argv)
{
	struct cell_params cell = {.capacity_mah = 20, .soc = 0.9, .internal_ohm = 0.08,
				   .load_ohm = 2.2, .ambient_c = 25, .thermal_tau_s = 10, .hot_mark_c = 60};
	static const struct option longopts[] = {
		{"elf", 1, 0, 'e'},	     {"link", 1, 0, 'l'},	{"truth", 1, 0, 't'},
		{"speed", 1, 0, 's'},	     {"hold", 0, 0, 'H'},	{"seed", 1, 0, 'r'},
		{"stop-after", 1, 0, 'x'},   {"capacity-mah", 1, 0, 'c'}, {"soc", 1, 0, 'q'},
		{"internal-ohm", 1, 0, 'i'}, {"load-ohm", 1, 0, 'o'},	{"ambient", 1, 0, 'a'},
		{"thermal-tau", 1, 0, 'u'},  {"hot-mark", 1, 0, 'm'},	{"charge-ma", 1, 0, 'C'},
		{"charge-v", 1, 0, 'V'},     {"term-ma", 1, 0, 'T'},	{"rc-tau-ms", 1, 0, 'R'},
		{0, 0, 0, 0}};
	/* The CC variant's charger module and filter (used only when the firmware is that variant) */
	struct cc_params cc = {.present = false, .rc_tau_ms = 47, .charge_a = 0.1, .charge_v = 4.2,
			       .term_a = 0.01};
	int c;
	while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
		switch (c) {
		case 'e': opt.elf = optarg; break;
		case 'l': opt.link = optarg; break;
		case 't': opt.truth = optarg; break;
		case 's': opt.speed = arg_double(optarg, "--speed"); break;
		case 'H': opt.hold = true; break;
		case 'r': rng_state ^= (uint64_t)arg_double(optarg, "--seed") * 0x2545f4914f6cdd1dULL; break;
		case 'x': opt.stop_after_s = arg_double(optarg, "--stop-after"); break;
		case 'c': cell.capacity_mah = arg_double(optarg, "--capacity-mah"); break;
		case 'q': cell.soc = arg_double(optarg, "--soc"); break;
		case 'i': cell.internal_ohm = arg_double(optarg, "--internal-ohm"); break;
		case 'o': cell.load_ohm = arg_double(optarg, "--load-ohm"); break;
		case 'a': cell.ambient_c = arg_double(optarg, "--ambient"); break;
		case 'u': cell.thermal_tau_s = arg_double(optarg, "--thermal-tau"); break;
		case 'm': cell.hot_mark_c = arg_double(optarg, "--hot-mark"); break;
		case 'C': cc.charge_a = arg_double(optarg, "--charge-ma") / 1000; break;
		case 'V': cc.charge_v = arg_double(optarg, "--charge-v"); break;
		case 'T': cc.term_a = arg_double(optarg, "--term-ma") / 1000; break;
		case 'R': cc.rc_tau_ms = arg_double(optarg, "--rc-tau-ms"); break;
		default: exit(2);
		}
	}
	if (!opt.elf || !opt.link || !opt.truth) {
		fprintf(stderr, "usage: rig-harness --elf <firmware.elf> --link <path> --truth <file.json> "
				"[--speed 1] [--hold] [--seed n] [--stop-after s] [--capacity-mah 20] [--soc 0.9]\n"
				"       [--internal-ohm 0.08] [--load-ohm 2.2] [--ambient 25] [--thermal-tau 10] [--hot-mark 60]\n"
				"       [--charge-ma 100] [--charge-v 4.2] [--term-ma 10] [--rc-tau-ms 47]   (CC variant)\n");
		return 2;
	}
	/* Two boards' worth of errors the host does not know: each channel its own. */
	const struct board_errors errors[2] = {
		{.amp_offset_v = 150e-6, .connection_ohm = 0.0010, .divider_error = 0.003, .ntc_r25_error = 0.01,
		 .cc_divider_error = 0.01, .cc_loop_offset_v = -120e-6, .monitor_error = 0.02},
		{.amp_offset_v = 90e-6, .connection_ohm = 0.0006, .divider_error = -0.002, .ntc_r25_error = -0.01,
		 .cc_divider_error = -0.008, .cc_loop_offset_v = 80e-6, .monitor_error = -0.015},
	};

	elf_firmware_t fw;
	memset(&fw, 0, sizeof fw);
	if (elf_read_firmware(opt.elf, &fw)) {
		fprintf(stderr, "rig-harness: cannot read %s\n", opt.elf);
		return 1;
	}
	/* The ELF names no MCU and no clock; without the voltages the ADC's reference is wrong. */
	strcpy(fw.mmcu, "atmega328p");
	fw.frequency = F_CPU;
	fw.vcc = fw.avcc = fw.aref = (uint32_t)lround(AVCC_V * 1000);
	avr = avr_make_mcu_by_name(fw.mmcu);
	if (!avr || avr_init(avr)) {
		fprintf(stderr, "rig-harness: simavr has no %s\n", fw.mmcu);
		return 1;
	}
	avr_load_firmware(avr, &fw);
	uint32_t exit_pc = symbol_addr(&fw, "_exit");
	/* The CC variant is known by its trim's tick; its board has the op-amp loop and chargers. */
	cc.present = symbol_addr(&fw, "cc_tick") != 0;
	channel_init(&ch[0], &cell, &errors[0], &cc);
	channel_init(&ch[1], &cell, &errors[1], &cc);
	/* simavr's default sleep waits in real time; pacing is done here instead, so that the
	 * emulation can also run flat out. */
	avr->sleep = sleep_not;
	core_reset = avr->reset;
	avr->reset = on_reset;
	avr_irq_register_notify(avr_io_getirq(avr, AVR_IOCTL_ADC_GETIRQ, ADC_IRQ_OUT_TRIGGER),
				on_adc_trigger, NULL);
	if (link_open(avr, opt.link)) {
		perror("rig-harness: pseudo-terminal");
		return 1;
	}
	signal(SIGTERM, on_signal);
	signal(SIGINT, on_signal);
	signal(SIGPIPE, SIG_IGN);
	fcntl(STDIN_FILENO, F_SETFL, fcntl(STDIN_FILENO, F_GETFL) | O_NONBLOCK);
	write_truth();
	printf("ready %s\n", opt.link);
	fflush(stdout);

	/* With --hold the chip stays in reset until the host's first byte: serialport flushes a
	 * port when it opens it, so the boot lines would otherwise be lost. */
	while (opt.hold && !stop && !link_poll(0)) {
		control(0);
		usleep(2000);
	}
	clock_gettime(CLOCK_MONOTONIC, &pace.t0);
	pace.booted = true;

	const avr_cycle_count_t per_ms = F_CPU / 1000;
	avr_cycle_count_t next_ms = per_ms;
	uint8_t pins = 0, chg = 0;
	unsigned ms_count = 0;
	while (!stop) {
		int state = avr_run(avr);
		if (state == cpu_Done || state == cpu_Crashed) {
			fprintf(stderr, "rig-harness: the emulated chip stopped (state %d)\n", state);
			break;
		}
		if (reset_pending) {
			reset_pending = false;
			note_reset();
		}
		/* How soon after power-on or a reset the firmware drives both load pins (low). */
		long *driven = nresets ? &resets[nresets - 1].driven_after : &boot_driven_after;
		if (*driven < 0 && (avr->data[DDRB_ADDR] & LOAD_PINS) == LOAD_PINS)
			*driven = (long)(avr->cycle - last_reset_cycle);
		if (cc.present && boot_cc_driven_after < 0 && !nresets &&
		    (avr->data[DDRB_ADDR] & 0x0c) == 0x0c && (avr->data[DDRD_ADDR] & CHARGER_PINS) == CHARGER_PINS)
			boot_cc_driven_after = (long)avr->cycle;
		/* A load is on while its PORTB bit is set: driven high as an output, or, as an input,
		 * through the internal pull-up, which beats the gate's pull-down. */
		uint8_t now_pins = avr->data[PORTB_ADDR] & LOAD_PINS;
		if (now_pins != pins) {
			double t = emulated_ms();
			advance_world(t);
			for (int k = 0; k < 2; k++)
				if (channel_switch(&ch[k], t, now_pins & (1 << k)))
					ch[k].seg[ch[k].nseg - 1].from_real_ms = real_ms();
			pins = now_pins;
		}
		uint8_t now_chg = cc.present ? avr->data[PORTD_ADDR] & CHARGER_PINS : 0;
		if (now_chg != chg) {
			double t = emulated_ms();
			advance_world(t);
			for (int k = 0; k < 2; k++)
				if (channel_charger(&ch[k], t, now_chg & (0x10 << k)))
					ch[k].seg[ch[k].nseg - 1].from_real_ms = real_ms();
			chg = now_chg;
		}
		if (avr->cycle < next_ms)
			continue;
		next_ms += per_ms;
		advance_world(emulated_ms());
		if (cc.present)
			read_pwm();
		link_poll(emulated_ms());
		pace_tick();
		if (++ms_count % 10 == 0)
			control(exit_pc);
		if (ms_count % 100 == 0)
			write_truth();
		if (opt.stop_after_s > 0 && emulated_ms() >= opt.stop_after_s * 1000)
			stop = 1;
	}
	write_truth();
	double real = real_ms();
	printf("emulated %.3f s in %.3f s real: %.2f x real time\n", emulated_ms() / 1000, real / 1000,
	       emulated_ms() / (real > 0 ? real : 1));
	link_close();
	avr_terminate(avr);
	return 0;
}
