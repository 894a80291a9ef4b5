// Duct-versus-baseline comparison and reports: pure functions over stored sessions.
export { compareSessions, idealSaving, idealThrustRatio, idealPowerFactor, rigSigma, ductMass, type Comparison, type ComparisonRow, type CompareInput, type CompareOptions, type SessionCurveInfo } from './compare.js';
export { vehicleVerdict, validateVehicle, type VehicleSpec, type VehicleVerdict, type VehicleSessionResult } from './vehicle.js';
export { renderSessionReport, renderComparisonReport, SAFETY_CAUTIONS } from './report.js';
export { G0 } from './curve.js';
