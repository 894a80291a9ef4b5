import { describe, expect, it } from 'vitest';
import { allowedHosts, hostAllowed, originAllowed, tokenFromCookie, tokenFromUrl, tokenMatches } from '../server/http/access.js';

describe('access checks', () => {
  const hosts = allowedHosts('127.0.0.1', 8470);
  it('accepts only canonical loopback Host values for our port', () => {
    for (const ok of ['127.0.0.1:8470', 'localhost:8470', '[::1]:8470', 'LOCALHOST:8470']) expect(hostAllowed(ok, hosts)).toBe(true);
    for (const bad of [
      'attacker.example',
      'attacker.example:8470',
      'localhost.:8470', // trailing dot
      '127.0.0.1.:8470',
      '2130706433:8470', // 127.0.0.1 as one decimal number
      '0x7f000001:8470', // hex
      '0177.0.0.1:8470', // octal
      '127.1:8470',
      '127.0.0.1:8471',
      '127.0.0.1',
      '',
      undefined,
    ]) {
      expect(hostAllowed(bad, hosts), String(bad)).toBe(false);
    }
  });
  it('accepts our own origin or none, refuses foreign ones', () => {
    expect(originAllowed(undefined, hosts)).toBe(true);
    expect(originAllowed('http://127.0.0.1:8470', hosts)).toBe(true);
    expect(originAllowed('http://localhost:8470', hosts)).toBe(true);
    for (const bad of ['http://attacker.example', 'https://127.0.0.1:8470', 'http://127.0.0.1:9999', 'null', 'file://', 'http://localhost.:8470']) {
      expect(originAllowed(bad, hosts), bad).toBe(false);
    }
  });
  it('compares tokens exactly', () => {
    expect(tokenMatches('s3cret', 's3cret')).toBe(true);
    for (const bad of ['s3cre', 's3cret ', 'S3cret', '', null, undefined, 'x'.repeat(10000)]) expect(tokenMatches('s3cret', bad as string)).toBe(false);
  });
  it('reads the token from the query string and the cookie', () => {
    expect(tokenFromUrl('/ws?token=abc%2Bdef')).toBe('abc+def');
    expect(tokenFromUrl('/ws')).toBeNull();
    expect(tokenFromCookie('a=1; ductbench_token=xyz; b=2')).toBe('xyz');
    expect(tokenFromCookie('a=1')).toBeNull();
  });
  it('a non-loopback bind adds exactly that host', () => {
    const h = allowedHosts('192.0.2.10', 80);
    expect(hostAllowed('192.0.2.10:80', h)).toBe(true);
    expect(hostAllowed('192.0.2.11:80', h)).toBe(false);
  });
});
