import { describe, expect, it } from 'vitest';
import { CHEMISTRY_IDS, ChemistryCell, ocvPerCell } from '../../src/sim/cell-model.js';
import { ThermalModel } from '../../src/sim/thermal.js';

describe('cell model', () => {
  it("open-circuit volts per cell span the chemistry's usual range, full to empty (common practice, from memory)", () => {
    // Rough resting voltages per cell, full and empty, as commonly quoted.
    const span: Record<(typeof CHEMISTRY_IDS)[number], [number, number]> = {
      'li-ion': [4.18, 2.5],
      lifepo4: [3.5, 2.5],
      nimh: [1.42, 0.95],
      nicd: [1.38, 0.9],
      alkaline: [1.6, 0.8],
      'lead-acid': [2.12, 1.75],
    };
    for (const id of CHEMISTRY_IDS) {
      expect(ocvPerCell(id, 1)).toBeCloseTo(span[id][0], 6);
      expect(ocvPerCell(id, 0)).toBeCloseTo(span[id][1], 6);
    }
    expect(ocvPerCell('lifepo4', 0.5)).toBeCloseTo(3.3, 6);
  });

  it('voltage never rises as charge is removed, and falls steeply near and past empty', () => {
    for (const id of CHEMISTRY_IDS) {
      let last = Infinity;
      for (let soc = 1; soc >= -0.05; soc -= 0.001) {
        const v = ocvPerCell(id, soc);
        expect(v).toBeLessThanOrEqual(last + 1e-12);
        last = v;
      }
      const midSlope = ocvPerCell(id, 0.55) - ocvPerCell(id, 0.45);
      const endSlope = ocvPerCell(id, 0.05) - ocvPerCell(id, -0.05);
      expect(endSlope).toBeGreaterThan(5 * midSlope);
      expect(ocvPerCell(id, -1)).toBe(0);
    }
  });

  it('physics: removing charge lowers state of charge by I·t / capacity; cells in series add volts', () => {
    const cell = new ChemistryCell({ chemistry: 'nimh', cells: 4, capacityAh: 2, initialSoc: 1 });
    expect(cell.ocvV()).toBeCloseTo(4 * 1.42, 9);
    cell.step(3600, 0.5);
    expect(cell.stateOfCharge).toBeCloseTo(0.75, 12);
  });

  it('internal resistance rises near empty and in the cold', () => {
    const cell = new ChemistryCell({
      chemistry: 'li-ion',
      cells: 1,
      capacityAh: 1,
      initialSoc: 0.5,
      internalOhmPerCell: 0.05,
    });
    expect(cell.internalOhm(25)).toBeCloseTo(0.05, 12);
    expect(cell.internalOhm(0)).toBeGreaterThan(2 * cell.internalOhm(25));
    cell.step(3600, 0.5);
    expect(cell.internalOhm(25)).toBeCloseTo(0.125, 12);
  });

  it('rejects impossible cells', () => {
    expect(
      () => new ChemistryCell({ chemistry: 'nimh', cells: 0, capacityAh: 1, initialSoc: 1 }),
    ).toThrow(/cells/);
    expect(
      () => new ChemistryCell({ chemistry: 'nimh', cells: 1, capacityAh: 0, initialSoc: 1 }),
    ).toThrow(/capacity/);
  });
});

describe('thermal model', () => {
  it('physics: with steady heat P the cell settles at ambient + P/G, with time constant C/G', () => {
    const m = new ThermalModel({
      ambientC: 20,
      heatCapacityJPerK: 40,
      conductanceWPerK: 0.1,
      loadHeatFraction: 0,
      extraHeatW: 0,
    });
    m.step(400, 1); // one time constant: 1 − 1/e of the way to 30 °C
    expect(m.temperatureC).toBeCloseTo(20 + 10 * (1 - Math.exp(-1)), 9);
    for (let k = 0; k < 100; k++) m.step(100, 1);
    expect(m.temperatureC).toBeCloseTo(30, 6);
  });

  it('heat is I²R of the cell plus the coupled share of the load and the extra input', () => {
    const m = new ThermalModel({
      ambientC: 20,
      heatCapacityJPerK: 40,
      conductanceWPerK: 0.1,
      loadHeatFraction: 0.5,
      extraHeatW: 2,
    });
    expect(m.heatW(2, 0.05, 1)).toBeCloseTo(4 * 0.05 + 0.5 * 4 * 1 + 2, 12);
  });
});
