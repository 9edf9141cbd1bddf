/**
 * A segment as the run folder keeps it (ended, with its reason) and its figures: the shapes
 * segments.jsonl and result.json hold, defined with the program so that its accounting needs
 * nothing from the record layer.
 */
import type { FigureUncertainty } from '../results/uncertainty.js';
import type { SegmentEnd, SegmentRecord } from './sequence-types.js';

/** A segment as segments.jsonl keeps it: ended, with its reason. */
export type SegmentLine = SegmentRecord & {
  ended_ms: number;
  end_reason: SegmentEnd | 'interrupted';
};

/** One segment of a program run with what went in or out of the cell during it. */
export interface SegmentFigures {
  index: number;
  kind: 'rest' | 'discharge' | 'charge';
  purpose: 'program' | 'storage';
  step: string;
  cycle: number | null;
  started_ms: number;
  ended_ms: number;
  end_reason: string;
  setpoint: Record<string, number | string | null>;
  duration_s: number;
  /** Charge moved, Ah, never negative: out of the cell for a discharge, into it for a charge. */
  charge_Ah: number;
  energy_Wh: number;
  /** Mean of the current's magnitude while the load or charger was on, A; null at rest. */
  mean_current_A: number | null;
  end_voltage_V: number | null;
  /** At the segment's first switch-on of a load: the resting voltage before it, V, and the DC resistance from the step, Ω; null without one. */
  open_circuit_V?: number | null;
  dc_resistance_ohm?: number | null;
  uncertainty: { charge_Ah: FigureUncertainty; energy_Wh: FigureUncertainty };
}
