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
	return OCV_V[OCV_N - 1];
}

static void solve(struct channel *c)
{
	double e = ocv(c->soc);
	double outside = c->cell.load_ohm + MOSFET_OHM + SHUNT_OHM + c->board.connection_ohm;
	c->current_a = c->load && e > 0 ? e / (c->cell.internal_ohm + outside) : 0;
	c->terminal_v = e - c->current_a * c->cell.internal_ohm;
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
}

void channel_init(struct channel *c, const struct cell_params *p, const struct board_errors *b)
{
	memset(c, 0, sizeof *c);
	c->cell = *p;
	c->board = *b;
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
	c->charge_as += i * dt;
	c->energy_ws += i * v * dt;
	if (c->load)
		c->load_on_s += dt;
	struct segment *s = &c->seg[c->nseg - 1];
	s->sum_a += i * dt_ms;
	s->sum_v += v * dt_ms;
	s->sum_c += c->temp_c * dt_ms;
	s->to_ms = now_ms;
	c->soc -= i * dt / (c->cell.capacity_mah * 3.6);
	/* First-order thermal model: the cell relaxes towards the ambient, warmed by its own
	 * internal loss (about 30 K/W for a small cell in still air). */
	double rise = i * i * c->cell.internal_ohm * 30.0;
	c->temp_c += (c->ambient_c + rise - c->temp_c) * (dt / c->cell.thermal_tau_s);
	if (c->hot_at_ms < 0 && c->temp_c >= c->cell.hot_mark_c)
		c->hot_at_ms = now_ms;
	solve(c);
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
		double in = c->current_a * (SHUNT_OHM + c->board.connection_ohm) + c->board.amp_offset_v;
		double out = in * AMP_GAIN;
		return out < 0 ? 0 : out > AVCC_V ? AVCC_V : out;
	}
	default: {
		double t = c->temp_c + 273.15;
		double r = NTC_R25_OHM * (1 + c->board.ntc_r25_error) *
			   exp(NTC_BETA_K * (1.0 / t - 1.0 / 298.15));
		return AVCC_V * r / (NTC_FIXED_OHM + r);
	}
	}
}
