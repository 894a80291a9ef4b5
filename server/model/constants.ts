// Physical constants and unit conversions shared by the model. Kept in one place so that a test which
// checks "grams per watt" and the code that computes it cannot drift apart.

/** Standard gravity, m/s^2 (CGPM 1901; ISO 80000-3). */
export const G0 = 9.80665;

/** One gram-force in newtons. */
export const GRAM_FORCE_N = 9.80665e-3;

/** Convert a thrust in newtons to gram-force. */
export function newtonsToGramForce(thrustN: number): number {
  return thrustN / GRAM_FORCE_N;
}

/** Convert rpm to rad/s. */
export function rpmToRadPerSec(rpm: number): number {
  return (rpm * 2 * Math.PI) / 60;
}

/** Convert rad/s to rpm. */
export function radPerSecToRpm(omega: number): number {
  return (omega * 60) / (2 * Math.PI);
}

/** Version of the performance model; bump when a prediction for the same rig changes. */
export const modelVersion = '2.0.0';
