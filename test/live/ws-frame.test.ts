import { createServer } from 'node:http';
import type { AddressInfo } from 'node:net';
import type { Duplex } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { WebSocket, WebSocketServer } from 'ws';
import { textFrame } from '../../src/live/ws-frame.js';

// Reference: the ws library's own client, which parses frames as RFC 6455 §5.2 lays them out
// and closes the connection on any malformed one.
describe('textFrame', () => {
  it('frames texts of every length class (7-bit, 16-bit and 64-bit lengths) that a WebSocket client reads back exactly', async () => {
    const texts = [
      ...[0, 1, 125, 126, 127, 65535, 65536, 70_000].map((n) => 'x'.repeat(n)),
      'cell at 25 °C – ok',
    ];
    const server = createServer();
    const wss = new WebSocketServer({ noServer: true });
    server.on('upgrade', (req, socket: Duplex, head) => {
      wss.handleUpgrade(req, socket, head, () => {
        for (const t of texts) socket.write(textFrame(Buffer.from(t)));
      });
    });
    await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
    const got: string[] = [];
    const client = new WebSocket(`ws://127.0.0.1:${(server.address() as AddressInfo).port}/`);
    let closed: number | null = null;
    client.on('close', (code) => (closed = code));
    client.on('message', (data: Buffer, isBinary) => {
      expect(isBinary).toBe(false);
      got.push(data.toString());
    });
    await expect.poll(() => got.length, { timeout: 5000 }).toBe(texts.length);
    expect(got).toEqual(texts);
    expect(closed).toBeNull();
    client.close();
    wss.close();
    await new Promise<void>((resolve) => server.close(() => resolve()));
  });
});
