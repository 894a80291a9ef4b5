// Transport over an operating-system serial port (USB CDC, FTDI, or a pseudo-terminal).
//
// serialport opens and configures the port (baud rate, raw mode, exclusive lock) and stays the writer of last
// resort, but it does not read: its reads go through libuv's thread pool, one hop to a worker and back for
// every chunk, and a tty hands out at most 4 KB a read, so at high line rates the daemon sat idle waiting for
// those hops (measured: 58 % idle at 110k lines/s). Instead the tty is read through a second descriptor as a
// tty.ReadStream, which libuv reads on the event loop as soon as epoll says data is there, like stdin.
//
// Writes that the kernel takes at once are written synchronously on the port's own descriptor (it is
// non-blocking): a STOP is then in the kernel's buffer when write() returns, not after a thread-pool round trip.
// Anything the kernel does not take at once (EAGAIN, a short write) goes through serialport, which waits for
// the port to become writable; while such a write is outstanding every later write follows it there, so the
// bytes keep the call order.

import { closeSync, constants, openSync, writeSync } from 'node:fs';
import { ReadStream, isatty } from 'node:tty';
import { SerialPort } from 'serialport';
import type { Transport, TransportHandlers } from './transport.js';

/** The binding's descriptor (serialport's Linux and macOS bindings keep it as `fd`), or null. */
function portFd(port: SerialPort): number | null {
  const fd = (port.port as { fd?: number | null } | undefined)?.fd;
  return typeof fd === 'number' && fd >= 0 ? fd : null;
}

function cleanOpenError(err: Error): Error {
  // serialport says "Error: No such file or directory, cannot open PATH"; the link adds the path itself.
  return new Error(err.message.replace(/^Error: /, '').replace(/, cannot open .*$/, ''));
}

export class SerialTransport implements Transport {
  readonly description: string;
  private port: SerialPort | null = null;
  private reader: ReadStream | null = null;
  /** The read descriptor when the stream does not own it (libuv reopened the tty), else null. */
  private ownReadFd: number | null = null;
  private closing = false;
  /** Writes handed to serialport and not yet finished. */
  private queued = 0;

  constructor(
    readonly path: string,
    readonly baudRate = 115200,
  ) {
    this.description = `${path} @ ${baudRate}`;
  }

  open(h: TransportHandlers): Promise<void> {
    return new Promise((resolve, reject) => {
      // The read descriptor is opened before serialport takes the port's exclusive lock (TIOCEXCL), which would
      // refuse a second open by an unprivileged user. Not a tty (a FIFO in some test rig): serialport reads.
      let readFd: number | null = null;
      try {
        readFd = openSync(this.path, constants.O_RDONLY | constants.O_NOCTTY | constants.O_NONBLOCK);
        if (!isatty(readFd)) {
          closeSync(readFd);
          readFd = null;
        }
      } catch {
        readFd = null; // serialport's open below reports why the port cannot be opened
      }
      const port = new SerialPort({ path: this.path, baudRate: this.baudRate, autoOpen: false, hupcl: false });
      port.open((err) => {
        if (err) {
          if (readFd !== null) closeSync(readFd);
          reject(cleanOpenError(err));
          return;
        }
        this.port = port;
        const lost = (e: Error) => {
          if (this.closing) return;
          this.closing = true; // one report per transport: a read error and the port's close may both follow
          h.onClose(e);
        };
        if (readFd !== null) {
          // Created only now, after serialport has put the line in raw mode; it reads once 'data' is listened to.
          const reader = new ReadStream(readFd);
          this.reader = reader;
          // libuv reopens a tty by its path to get a descriptor of its own; ours then stays open after the
          // stream is destroyed, which keeps the port open for the device side (a pty's other end never sees
          // the close, a board's adapter never sees the host leave). Close ours ourselves in that case.
          const handleFd = (reader as unknown as { _handle?: { fd?: number } })._handle?.fd;
          this.ownReadFd = typeof handleFd === 'number' && handleFd !== readFd ? readFd : null;
          reader.on('data', (chunk: Buffer) => h.onData(chunk));
          // An unplugged USB port or a closed pty reads as EIO (an error) or as end of file.
          reader.on('error', (e: Error) => lost(e));
          reader.on('end', () => lost(new Error('device closed the port')));
        } else {
          port.on('data', (chunk: Buffer) => h.onData(chunk));
        }
        // serialport emits 'close' with an error object whose disconnected flag is set on an unplug.
        port.on('close', (e?: Error) => {
          this.port = null;
          lost(e ?? new Error('port closed'));
        });
        port.on('error', (e: Error) => lost(e));
        resolve();
      });
    });
  }

  write(data: string): Promise<void> {
    const port = this.port;
    if (!port) return Promise.reject(new Error('port not open'));
    const buf = Buffer.from(data, 'latin1');
    let done = 0;
    const fd = this.queued === 0 ? portFd(port) : null;
    if (fd !== null) {
      try {
        done = writeSync(fd, buf, 0, buf.length);
      } catch (err) {
        const code = (err as NodeJS.ErrnoException).code;
        if (code !== 'EAGAIN' && code !== 'EWOULDBLOCK' && code !== 'EINTR') return Promise.reject(err as Error);
      }
      if (done === buf.length) return Promise.resolve();
    }
    this.queued++;
    return new Promise((resolve, reject) => {
      port.write(done === 0 ? buf : buf.subarray(done), (err) => {
        this.queued--;
        if (err) reject(err);
        else resolve();
      });
    });
  }

  close(): Promise<void> {
    this.closing = true;
    const port = this.port;
    const reader = this.reader;
    this.port = null;
    this.reader = null;
    reader?.destroy();
    if (this.ownReadFd !== null) {
      try {
        closeSync(this.ownReadFd);
      } catch {
        // already closed: nothing to release
      }
      this.ownReadFd = null;
    }
    if (!port || !port.isOpen) return Promise.resolve();
    return new Promise((resolve) => port.close(() => resolve()));
  }
}
