// Benchmark peer for droopline-stream-bench: the same telemetry frame fanned out to every client
// at a fixed rate by a minimal broadcaster on Node.js with the `ws` package, the way one would
// write it in JavaScript. Usage: node ws_peer.mjs PORT FRAME_FILE [RATE_HZ]
import { readFileSync } from 'node:fs';
import { WebSocketServer } from 'ws';

const [port, frameFile, rate = '20'] = process.argv.slice(2);
const template = JSON.parse(readFileSync(frameFile, 'utf8'));
const wss = new WebSocketServer({ host: '127.0.0.1', port: Number(port) });
let step = 0;
wss.on('connection', (ws) => ws.send(JSON.stringify({ type: 'hello' })));
setInterval(() => {
  template.wall_s = Date.now() / 1000;
  template.t_s = (step += 5) * 0.01;
  const text = JSON.stringify(template); // encoded once, sent to all
  for (const client of wss.clients) if (client.readyState === 1) client.send(text);
}, 1000 / Number(rate));
wss.on('listening', () => console.log(`listening on 127.0.0.1:${port}`));
