#include "world.h"
#include <math.h>
#include <string.h>

/* Open-circuit voltage of a generic Li-ion cell over state of charge (a model of our own with the
 * usual shape: steep at both ends, a long gentle slope between). */
static const double OCV_SOC[] = {0.00, 0.03, 0.06, 0.10, 0.20, 0.30, 0.40, 0.50, 0.60, 0.70, 0.80, 0.90, 1.00};
static const double OCV_V[] = {2.80, 3.25, 3.40, 3.50, 3.60, 3.67, 3.73, 3.79, 3.86, 3.94, 4.02, 4.09, 4.18};
#define OCV_N (sizeof OCV_SOC / sizeof OCV_SOC[0])

static double ocv(double soc)
{
	if (soc <= 0)
		return OCV_V[0] + soc * 10.0; /* past empty the voltage collapses */
	for (unsigned i = 1; i < OCV_N; i++)
		if (soc <= OCV_SOC[i]) {
			double f = (soc - OCV_SOC[i - 1]) / (OCV_SOC[i] - OCV_SOC[i - 1]);
			return OCV_V[i - 1] + f * (OCV_V[i] - OCV_V[i - 1]);
		}
	/* Past full (only a charger gets there) the voltage climbs steeply. */
	return OCV_V[OCV_N - 1] + (soc - 1.0) * 3.0;
}

/* The current the CC variant's loop holds: the filtered PWM voltage through the setpoint
 * divider (passed by the analog switch while the enable pin is high) appears across the shunt
 * and its connections, less the loop op-amp's offset; unless the cell cannot drive that much
 * through the series resistance with the MOSFET fully on. */
static double cc_load_current(const struct channel *c, double e)
{
	double k = CC_DIV_BOTTOM_OHM / (CC_DIV_TOP_OHM + CC_DIV_BOTTOM_OHM) * (1 + c->board.cc_divider_error);
	double sense = SHUNT_OHM + c->board.connection_ohm;
	double want = (c->rc_v * k - c->board.cc_loop_offset_v) / sense;
	double most = e / (c->cell.internal_ohm + c->cell.load_ohm + MOSFET_OHM + sense);
	want = want < 0 ? 0 : want;
	return want < most ? want : most;
}

/* The charger module: its constant current until the cell's terminal voltage reaches its
 * constant voltage, then what that voltage drives through the cell's resistance, until that
 * falls below the termination current; then it stays off until its enable is cycled. */
static double charger_current(struct channel *c, double e)
{
	if (!c->charger_on || c->phase == PHASE_DONE)
		return 0;
	double cv = (c->cc.charge_v - e) / c->cell.internal_ohm;
	if (cv >= c->cc.charge_a) {
		c->phase = PHASE_CC;
		return c->cc.charge_a;
	}
	c->phase = PHASE_CV;
	return cv > 0 ? cv : 0;
}

static void solve(struct channel *c)
{
	double e = ocv(c->soc);
	if (c->cc.present) {
		c->load_a = c->load && e > 0 ? cc_load_current(c, e) : 0;
		c->charger_a = charger_current(c, e);
	} else {
		double outside = c->cell.load_ohm + MOSFET_OHM + SHUNT_OHM + c->board.connection_ohm;
		c->load_a = c->load && e > 0 ? e / (c->cell.internal_ohm + outside) : 0;
		c->charger_a = 0;
	}
	c->current_a = c->load_a - c->charger_a;
	c->terminal_v = e - c->current_a * c->cell.internal_ohm;
}

static int channel_mode(const struct channel *c)
{
	return c->load ? MODE_DISCHARGE : c->charger_on ? MODE_CHARGE : MODE_REST;
}

static void open_segment(struct channel *c, double now_ms)
{
	if (c->nseg == SEGMENTS_MAX) {
		/* Keep the first half (the calibration's points) and the latest. */
		memmove(&c->seg[SEGMENTS_MAX / 2], &c->seg[SEGMENTS_MAX / 2 + 1],
			(SEGMENTS_MAX / 2 - 1) * sizeof c->seg[0]);
		c->nseg--;
		c->seg_dropped++;
	}
	struct segment *s = &c->seg[c->nseg++];
	memset(s, 0, sizeof *s);
	s->from_ms = s->to_ms = now_ms;
	s->load = c->load;
	s->mode = channel_mode(c);
	s->phase = c->charger_on ? c->phase : PHASE_OFF;
}

void channel_init(struct channel *c, const struct cell_params *p, const struct board_errors *b,
		  const struct cc_params *cc)
{
	memset(c, 0, sizeof *c);
	c->cell = *p;
	c->board = *b;
	c->cc = *cc;
	c->soc = p->soc;
	c->temp_c = c->ambient_c = p->ambient_c;
	c->hot_at_ms = -1;
	solve(c);
	open_segment(c, 0);
}

void channel_step(struct channel *c, double now_ms, double dt_ms)
{
	double dt = dt_ms / 1000.0;
	double i = c->current_a, v = c->terminal_v;
	c->charge_as += c->load_a * dt;
	c->energy_ws += c->load_a * v * dt;
	c->charged_as += c->charger_a * dt;
	if (c->load)
		c->load_on_s += dt;
	if (c->charger_on)
		c->charge_on_s += dt;
	if (c->load && c->charger_on)
		c->both_on_ms += dt_ms;
	struct segment *s = &c->seg[c->nseg - 1];
	s->sum_a += i * dt_ms;
	s->sum_v += v * dt_ms;
	s->sum_c += c->temp_c * dt_ms;
	s->to_ms = now_ms;
	double leak_a = c->leak_ohm > 0 ? ocv(c->soc) / c->leak_ohm : 0;
	c->leaked_as += leak_a * dt;
	c->soc -= (i + leak_a) * dt / (c->cell.capacity_mah * 3.6);
	/* First-order thermal model: the cell relaxes towards the ambient, warmed by its own
	 * internal loss (about 30 K/W for a small cell in still air). */
	double rise = i * i * c->cell.internal_ohm * 30.0;
	c->temp_c += (c->ambient_c + rise - c->temp_c) * (dt / c->cell.thermal_tau_s);
	if (c->hot_at_ms < 0 && c->temp_c >= c->cell.hot_mark_c)
		c->hot_at_ms = now_ms;
	if (c->cc.present) {
		/* The PWM's filter: two equal RC stages (the second loads the first lightly) */
		double a = 1 - exp(-dt_ms / c->cc.rc_tau_ms);
		c->rc1_v += (c->pwm_v - c->rc1_v) * a;
		c->rc_v += (c->rc1_v - c->rc_v) * a;
	}
	int phase = c->phase;
	solve(c);
	/* Termination is judged on the current after the step; each phase is its own segment. */
	if (c->phase == PHASE_CV && c->charger_a < c->cc.term_a) {
		c->phase = PHASE_DONE;
		solve(c);
	}
	if (c->charger_on && c->phase != phase)
		open_segment(c, now_ms);
}

bool channel_switch(struct channel *c, double now_ms, bool load)
{
	if (load == c->load)
		return false;
	c->load = load;
	solve(c);
	open_segment(c, now_ms);
	return true;
}

bool channel_charger(struct channel *c, double now_ms, bool on)
{
	if (on == c->charger_on)
		return false;
	c->charger_on = on;
	c->phase = on ? PHASE_CC : PHASE_OFF;
	solve(c);
	open_segment(c, now_ms);
	return true;
}

void channel_leak(struct channel *c, double ohm)
{
	c->leak_ohm = ohm > 0 ? ohm : 0;
}

double channel_pin_v(const struct channel *c, int which)
{
	switch (which) {
	case 0: {
		double ratio = DIVIDER_BOTTOM_OHM / (DIVIDER_TOP_OHM + DIVIDER_BOTTOM_OHM);
		return c->terminal_v * ratio * (1 + c->board.divider_error);
	}
	case 1: {
		/* The amplifier sees the shunt and its connections; its offset adds at the input.
		 * A single-supply output cannot go below ground nor above its supply. */
		double in = c->load_a * (SHUNT_OHM + c->board.connection_ohm) + c->board.amp_offset_v;
		double out = in * AMP_GAIN;
		return out < 0 ? 0 : out > AVCC_V ? AVCC_V : out;
	}
	case 3: {
		/* The charger's monitor: proportional to its current, 1 V at its programmed one. */
		if (!c->cc.present || c->cc.charge_a <= 0)
			return 0;
		return c->charger_a / c->cc.charge_a * MONITOR_V_AT_FULL * (1 + c->board.monitor_error);
	}
	default: {
		double t = c->temp_c + 273.15;
		double r = NTC_R25_OHM * (1 + c->board.ntc_r25_error) *
			   exp(NTC_BETA_K * (1.0 / t - 1.0 / 298.15));
		return AVCC_V * r / (NTC_FIXED_OHM + r);
	}
	}
}
