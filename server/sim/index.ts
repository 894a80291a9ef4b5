// The virtual bench's public surface: a software microcontroller speaking wire protocol v1 over its own
// physical truth model, in process (SimTransport), on a real pseudo-terminal (runSimOnPty, simMain), or
// stepped by hand in tests (VirtualBench.advance).

export { VirtualBench, TICK_US, SIM_FIRMWARE_NAME, SIM_FIRMWARE_VERSION, type VirtualBenchOptions, type BenchSnapshot } from './bench.js';
export { SimTransport, type SimTransportOptions } from './sim-transport.js';
export { runSimOnPty, simMain, PtyUnavailable, type SimOnPty, type SimOnPtyOptions, type SimMainArgs } from './pty.js';
export { DEFAULT_OPEN_RIG, DEFAULT_DUCTED_RIG } from './default-rigs.js';
export { loadSimRig, validateSimRig, SimRigError } from './rig-file.js';
export { SIM_DEFAULTS, parseSimConstants, SimConfigError, type SimConstants } from './sim-constants.js';
export { FAULT_KINDS, type InjectedFaultKind, type FaultOptions, type InjectedFault } from './faults.js';
export type { FwMode, FwTransition, FirmwareEvent, FirmwareStats, FirmwareBugs, FirmwareBug } from './firmware.js';
export { NO_BUGS } from './firmware.js';
export { ductFactors, lipoCellOcv, type TruthState, type DuctFactors } from './truth.js';
export { Prng } from './prng.js';
