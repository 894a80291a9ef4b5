// A byte transport between the daemon and a device: a real serial port, or the virtual bench in process.
// The link layer (link.ts) owns exactly one transport at a time and is its single writer.

export interface TransportHandlers {
  onData(chunk: Buffer): void;
  /** The transport closed; `error` set when it was not asked to (an unplug, a dead process). */
  onClose(error?: Error): void;
}

export interface Transport {
  /** For people: "virtual bench (in process)" or "/dev/ttyACM0 @ 115200". */
  readonly description: string;
  /** The line's baud rate, when it has one (a serial port); the byte budget of the declared rates is judged against it. */
  readonly baudRate?: number;
  /** Opens the transport; rejects with an Error whose message says why (missing port, permission ...). */
  open(handlers: TransportHandlers): Promise<void>;
  /**
   * Writes bytes. Returns once they are handed to the operating system (or to the virtual device).
   * Callers never have more than one write outstanding, so ordering is the call order.
   */
  write(data: string): Promise<void>;
  close(): Promise<void>;
}
