// A crowd of dashboards in a process of its own: opens N WebSockets to the daemon at once, waits until every
// one has its first message (the snapshot), and says so on stdout as one JSON line; holds them open until
// stdin ends, then closes them. In its own process so that receiving N snapshots costs the daemon's process
// nothing but the sending. Used by bench/web-stall.ts and test/robust-web-stall.test.ts (through crowd.ts).
// Started as: node dist/bench/crowd-child.js '{"port":N,"token":"...","n":200}'

import WebSocket from 'ws';

const { port, token, n } = JSON.parse(process.argv[2]) as { port: number; token: string; n: number };
const say = (obj: unknown) => process.stdout.write(JSON.stringify(obj) + '\n');
const sockets: WebSocket[] = [];
let first = 0;
let failed = 0;
let bytes = 0;
const t0 = performance.now();

function settle(): void {
  if (first + failed === n) say({ type: 'ready', snapshots: first, failed, bytes, ms: performance.now() - t0 });
}

for (let i = 0; i < n; i++) {
  const ws = new WebSocket(`ws://127.0.0.1:${port}/ws?token=${encodeURIComponent(token)}`, { headers: { origin: `http://127.0.0.1:${port}` } });
  sockets.push(ws);
  let seen = false;
  ws.on('message', (data: Buffer) => {
    if (seen) return;
    seen = true;
    bytes += data.length;
    first++;
    settle();
  });
  ws.on('error', () => {
    if (seen) return;
    seen = true;
    failed++;
    settle();
  });
}
if (n === 0) settle();

process.stdin.resume();
process.stdin.on('end', () => {
  for (const ws of sockets) ws.terminate();
  process.exit(0);
});
