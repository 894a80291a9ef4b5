// Built-in rigs for the virtual bench: an invented open 0.254 m (10 x 4.5 in) two-blade propeller on a
// 750 rpm/V outrunner and a 4-cell pack, and the same rotor in an invented tight-clearance duct. Numbers are
// plausible for that class of hardware (static thrust a few newtons to about 13 N at the 0.9 ceiling);
// names are made up for demos and tests.

import type { RigSpec } from '../model/rig-types.js';

export const DEFAULT_OPEN_RIG: RigSpec = {
  name: 'Millrace Lab open 10x4.5',
  description: 'Invented demo rig: 0.254 m two-blade propeller, 750 rpm/V outrunner, 4S 2200 mAh pack, open (no duct).',
  propeller: { diameter_m: 0.254, pitch_m: 0.1143, blades: 2, mass_kg: 0.016 },
  motor: { kv_rpm_per_v: 750, resistance_ohm: 0.085, no_load_current_a: 0.7, no_load_voltage_v: 10, mass_kg: 0.075 },
  esc: { efficiency: 0.95, throttle_map: 'voltage' },
  duct: null,
  supply: { cells: 4, internal_resistance_ohm: 0.035, capacity_mah: 2200 },
};

/**
 * The same rotor in a duct: 0.8 mm tip gap (0.6 % of the radius), 18 mm inlet lip, exit-area ratio near 1.1
 * over a gentle diffuser (about 4.5 degrees half-angle), 110 g.
 */
export const DEFAULT_DUCTED_RIG: RigSpec = {
  ...DEFAULT_OPEN_RIG,
  name: 'Millrace Lab ducted 10x4.5',
  description: 'Invented demo rig: the open rig in a 0.8 mm-clearance duct with an 18 mm lip and a short diffuser.',
  duct: {
    bore_diameter_m: 0.2556,
    inlet_lip_radius_m: 0.018,
    exit_diameter_m: 0.2664,
    length_m: 0.1,
    mass_kg: 0.11,
  },
};
