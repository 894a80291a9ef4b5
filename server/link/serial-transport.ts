// Transport over an operating-system serial port (USB CDC, FTDI, or a pseudo-terminal) using serialport.

import { SerialPort } from 'serialport';
import type { Transport, TransportHandlers } from './transport.js';

export class SerialTransport implements Transport {
  readonly description: string;
  private port: SerialPort | null = null;
  private closing = false;

  constructor(
    readonly path: string,
    readonly baudRate = 115200,
  ) {
    this.description = `${path} @ ${baudRate}`;
  }

  open(h: TransportHandlers): Promise<void> {
    return new Promise((resolve, reject) => {
      const port = new SerialPort({ path: this.path, baudRate: this.baudRate, autoOpen: false, hupcl: false });
      port.open((err) => {
        if (err) {
          // serialport says "Error: No such file or directory, cannot open PATH"; the link adds the path itself.
          reject(new Error(err.message.replace(/^Error: /, '').replace(/, cannot open .*$/, '')));
          return;
        }
        this.port = port;
        port.on('data', (chunk: Buffer) => h.onData(chunk));
        // serialport emits 'close' with an error object whose disconnected flag is set on an unplug.
        port.on('close', (e?: Error) => {
          this.port = null;
          if (!this.closing) h.onClose(e ?? new Error('port closed'));
        });
        port.on('error', (e: Error) => {
          if (!this.closing) h.onClose(e);
        });
        resolve();
      });
    });
  }

  write(data: string): Promise<void> {
    const port = this.port;
    if (!port) return Promise.reject(new Error('port not open'));
    return new Promise((resolve, reject) => {
      port.write(data, 'latin1', (err) => (err ? reject(err) : resolve()));
    });
  }

  close(): Promise<void> {
    this.closing = true;
    const port = this.port;
    this.port = null;
    if (!port || !port.isOpen) return Promise.resolve();
    return new Promise((resolve) => port.close(() => resolve()));
  }
}
