import { describe, expect, it } from 'vitest';
import { helpText, parseArgs, UsageError, type CommandSpec } from '../server/cli/args.js';

const spec: CommandSpec = {
  name: 'demo',
  summary: 'demo',
  usage: 'ductbench demo',
  options: {
    port: { kind: 'string', value: 'PATH', help: 'port' },
    baud: { kind: 'int', help: 'baud', min: 1200 },
    json: { kind: 'flag', help: 'json' },
    tag: { kind: 'string', help: 'tag', repeat: true },
  },
  positionals: [0, 1],
};

describe('argument parser', () => {
  it('parses values, flags, repeats and = forms', () => {
    const p = parseArgs(spec, ['--port', '/dev/ttyACM0', '--baud=115200', '--json', '--tag', 'a', '--tag', 'b', 'x']);
    expect(p.opts).toEqual({ port: '/dev/ttyACM0', baud: 115200, json: true, tag: ['a', 'b'] });
    expect(p.positionals).toEqual(['x']);
  });
  it('refuses unknown options, missing values, bad numbers and duplicates', () => {
    const bad: [string[], RegExp][] = [
      [['--prot', 'x'], /unknown option --prot/],
      [['--port'], /needs a value/],
      [['--port', '--json'], /needs a value/],
      [['--baud', 'fast'], /not a number/],
      [['--baud', '9600.5'], /whole number/],
      [['--baud', '300'], /below 1200/],
      [['--port', 'a', '--port', 'b'], /given twice/],
      [['--json=1'], /takes no value/],
      [['a', 'b'], /unexpected argument/],
    ];
    for (const [argv, re] of bad) expect(() => parseArgs(spec, argv), argv.join(' ')).toThrow(re);
    expect(() => parseArgs(spec, ['--nope'])).toThrow(UsageError);
  });
  it('help lists every option', () => {
    const h = helpText(spec);
    for (const k of Object.keys(spec.options)) expect(h).toContain(`--${k}`);
  });
});
