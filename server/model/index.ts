// The performance model: pure functions from a rig and the air to predicted bench numbers. No I/O, no clocks;
// safe to import from the server, the CLI, the tests and the browser.

export { modelVersion, G0, GRAM_FORCE_N, newtonsToGramForce, rpmToRadPerSec, radPerSecToRpm } from './constants.js';
export type { RigSpec, PropellerSpec, MotorSpec, EscSpec, DuctSpec, SupplySpec } from './rig-types.js';
export { parseRig, rigGeometry, RigError, SIGMA_MIN, SIGMA_MAX, type RigGeometry } from './rig.js';
export {
  isaAtmosphere,
  geopotentialHeight,
  isaAir,
  airFromDensity,
  humidAirDensity,
  saturationVapourPressure,
  dynamicViscosity,
  SEA_LEVEL_AIR,
  type AtmosphereState,
  type AirState,
} from './atmosphere.js';
export * from './momentum.js';
export { DEFAULT_POLAR, profileDrag, liftCoefficient, liftDependentDrag, type AirfoilPolar } from './airfoil.js';
export {
  bladeFromPropeller,
  prandtlTipLoss,
  prepareRotor,
  rotorAt,
  rotorCoefficients,
  omegaForThrust,
  profilePowerCoefficient,
  bemtStatic,
  DEFAULT_FACTORS,
  DEFAULT_STATIONS,
  type BladeDefinition,
  type InflowModel,
  type AeroFactors,
  type BemtOptions,
  type BemtRotor,
  type RotorState,
  type StationSolution,
} from './bemt.js';
export {
  DEFAULT_DUCT_LOSSES,
  DUCT_LOSS_RANGES,
  ductLossCoefficients,
  ductCondition,
  gapRetention,
  inletLossCoefficient,
  stallFraction,
  diffuserLength,
  SHROUD_REALISATION_MAX,
  type DuctLossCoefficients,
  type DuctCondition,
} from './duct-losses.js';
export {
  motorAtCurrent,
  maxEfficiencyPoint,
  solveOperatingPoint,
  operatingPointForThrust,
  kvRadPerSecPerVolt,
  escDuty,
  throttleForDuty,
  type MotorParams,
  type EscParams,
  type SupplyParams,
  type Drivetrain,
  type PropellerLoad,
  type MotorState,
  type OperatingPoint,
} from './motor.js';
export { tableLoad, type StaticTable } from './static-table.js';
export {
  buildRigModel,
  predictAtThrottle,
  predictCurve,
  predictAtThrusts,
  idealReference,
  deviation,
  measuredPower,
  PACK_CELL_VOLTAGE,
  defaultSupplyVoltage,
  withSupplyVoltage,
  type ModelOptions,
  type RigModel,
  type IdealReference,
  type PredictedPoint,
  type PredictionCurve,
  type ThrustPrediction,
  type MeasuredPoint,
  type Deviation,
} from './predict.js';
export {
  calibrate,
  fitOpenPredictDuct,
  ductEffectiveness,
  measuredGramsPerWatt,
  CalibrationError,
  FIT_PARAMETERS,
  type FitParameter,
  type CalibrationOptions,
  type CalibrationResult,
  type NoiseScale,
  type PerformancePoint,
  type DuctEffectiveness,
  type DuctEffectivenessLevel,
} from './calibrate.js';
