/* The analog world behind one rig channel: a cell, its load, the shunt and amplifier, the
 * divider and the thermistor, as the board's ADC pins see them. The model keeps its own truth
 * (charge and energy delivered while the load was on, by emulated time). */
#ifndef WORLD_H
#define WORLD_H
#include <stdbool.h>
#include <stdint.h>

#define SEGMENTS_MAX 64

/* One stretch of time with the load steady: means of the true values over it, so a test can
 * give a calibration the true current and voltage of the window it averaged. */
struct segment {
	double from_ms, to_ms;
	double from_real_ms; /* the host's time at its start, by the harness's clock */
	bool load;
	int mode;  /* enum mode */
	int phase; /* enum charge_phase, while charging */
	double sum_a, sum_v, sum_c; /* time integrals over the stretch, in unit x ms */
};

struct cell_params {
	double capacity_mah, soc, internal_ohm, load_ohm, ambient_c, thermal_tau_s, hot_mark_c;
};

/* The CC variant's parts (docs/firmware-wiring.md): what the firmware drives and the analog loop
 * does with it, and the charger module on the charger-enable pin. */
struct cc_params {
	bool present;		/* the firmware is the CC variant: the load is the op-amp loop */
	double rc_tau_ms;	/* each of the PWM filter's two RC stages */
	double charge_a;	/* the charger's constant current (its programming resistor) */
	double charge_v;	/* its constant-voltage level */
	double term_a;		/* it stops when the current in constant voltage falls below this */
};

enum mode { MODE_REST, MODE_DISCHARGE, MODE_CHARGE };
enum charge_phase { PHASE_OFF, PHASE_CC, PHASE_CV, PHASE_DONE };

/* What the board gets wrong and the host does not know: the calibration's job to find. */
struct board_errors {
	double amp_offset_v;   /* op-amp input offset */
	double connection_ohm; /* solder and trace in series with the two-terminal shunt */
	double divider_error;  /* relative error of the cell divider's ratio */
	double ntc_r25_error;  /* relative error of the NTC's R25 */
	double cc_divider_error; /* CC variant: relative error of the setpoint divider */
	double cc_loop_offset_v; /* CC variant: input offset of the loop's op-amp */
	double monitor_error;	 /* CC variant: relative gain error of the charger's current monitor */
};

struct channel {
	struct cell_params cell;
	struct board_errors board;
	bool load;
	double soc, temp_c, ambient_c;
	/* current_a: out of the cell (negative while charging); load_a through the load's shunt;
	 * charger_a from the charger into the cell */
	double current_a, terminal_v, load_a, charger_a;
	/* CC variant: the PWM pin's mean voltage now, the RC filter's output, the charger */
	struct cc_params cc;
	double pwm_v, rc1_v, rc_v;
	bool charger_on;
	int phase;
	/* truth: charge_as and energy_ws are what the load drew; charged_as what the charger put in */
	double charge_as, energy_ws, load_on_s, charged_as, charge_on_s, both_on_ms;
	double hot_at_ms; /* first time the cell reached hot_mark_c, -1 before */
	/* A soft internal short (a damaged separator): a resistance across the cell's EMF, inside
	 * it, so no shunt sees its current; 0 for none. A charger can never bring such a cell's
	 * current down to a termination current below what the short draws. */
	double leak_ohm, leaked_as;
	struct segment seg[SEGMENTS_MAX];
	unsigned nseg, seg_dropped;
};

/* The board's parts, as drawn in docs/firmware-wiring.md and config/rigs/cv328-reference.yaml. */
#define DIVIDER_TOP_OHM 10000.0
#define DIVIDER_BOTTOM_OHM 10000.0
#define SHUNT_OHM 0.025
#define AMP_GAIN 50.9 /* 1 + 49.9k / 1k */
#define NTC_R25_OHM 10000.0
#define NTC_BETA_K 3950.0
#define NTC_FIXED_OHM 10000.0
#define MOSFET_OHM 0.015
/* The ADC reference and the NTC divider's supply: AVcc, a little under the 5.000 V the rig
 * profile states, as a USB supply is; a gain error the calibration has to find. */
#define AVCC_V 4.97

#define CC_DIV_TOP_OHM 10000.0 /* the setpoint divider, as config.h says */
#define CC_DIV_BOTTOM_OHM 150.0
#define MONITOR_V_AT_FULL 1.0 /* the charger's monitor output at its programmed current */

void channel_init(struct channel *c, const struct cell_params *p, const struct board_errors *b,
		  const struct cc_params *cc);
/* Advances the physics by dt_ms of emulated time (the load steady meanwhile). */
void channel_step(struct channel *c, double now_ms, double dt_ms);
/* Returns true when the load really changed (a new segment began). */
bool channel_switch(struct channel *c, double now_ms, bool load);
/* CC variant: the charger-enable pin; true when it changed (a new segment began). */
bool channel_charger(struct channel *c, double now_ms, bool on);
/* A soft internal short of `ohm` from now on (0: none). */
void channel_leak(struct channel *c, double ohm);
/* The voltage at ADC input `which` (0 voltage, 1 current, 2 thermistor, 3 the charger's current
 * monitor), in volts, noise-free. */
double channel_pin_v(const struct channel *c, int which);

#endif
