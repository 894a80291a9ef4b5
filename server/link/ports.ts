// Lists serial ports. SerialPort.list() asks udevadm on Linux, which containers and minimal systems lack;
// then we fall back to scanning /dev for the usual names of USB serial adapters and boards.

import { readdirSync, realpathSync } from 'node:fs';
import { join } from 'node:path';
import { SerialPort } from 'serialport';

export interface PortInfo {
  path: string;
  /** Where the information came from: the system's device database, or a scan of /dev. */
  via: 'system' | 'dev-scan';
  manufacturer?: string;
  serialNumber?: string;
  vendorId?: string;
  productId?: string;
  byId?: string;
}

const DEV_PATTERNS = [/^ttyUSB\d+$/, /^ttyACM\d+$/, /^ttyAMA\d+$/, /^rfcomm\d+$/, /^ttyS[0-3]$/, /^cu\.usb/, /^tty\.usb/];

export function scanDev(dir = '/dev'): PortInfo[] {
  let names: string[] = [];
  try {
    names = readdirSync(dir);
  } catch {
    return [];
  }
  const byId = new Map<string, string>();
  try {
    const idDir = join(dir, 'serial', 'by-id');
    for (const n of readdirSync(idDir)) {
      try {
        byId.set(realpathSync(join(idDir, n)), n);
      } catch {
        /* dangling link */
      }
    }
  } catch {
    /* no by-id folder */
  }
  return names
    .filter((n) => DEV_PATTERNS.some((re) => re.test(n)))
    .sort()
    .map((n) => {
      const path = join(dir, n);
      const id = byId.get(path);
      return { path, via: 'dev-scan' as const, ...(id ? { byId: id } : {}) };
    });
}

export async function listPorts(): Promise<PortInfo[]> {
  try {
    const ports = await SerialPort.list();
    if (ports.length > 0) {
      return ports.map((p) => ({
        path: p.path,
        via: 'system' as const,
        ...(p.manufacturer ? { manufacturer: p.manufacturer } : {}),
        ...(p.serialNumber ? { serialNumber: p.serialNumber } : {}),
        ...(p.vendorId ? { vendorId: p.vendorId } : {}),
        ...(p.productId ? { productId: p.productId } : {}),
      }));
    }
  } catch {
    // udevadm missing or failing: fall through to the scan
  }
  return scanDev();
}
