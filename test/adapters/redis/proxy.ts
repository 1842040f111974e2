// A TCP proxy in front of a Redis server, for fault tests: it passes bytes both ways, refuses new
// connections, or lets commands through and cuts the connection before the reply comes back (the
// command ran, the client never hears so) — the fault that makes a client retry a write that landed.
// It listens on port 0 and reads its port back.

import { createServer, connect, type Server, type Socket } from 'node:net';

export type ProxyMode = 'pass' | 'refuse' | 'drop-replies';

export class FaultProxy {
  mode: ProxyMode = 'pass';
  /** Replies cut so far (each cut closes one client connection). */
  cuts = 0;
  private server: Server | undefined;
  private readonly sockets = new Set<Socket>();
  port = 0;

  constructor(private readonly target: { host: string; port: number }) {}

  get url(): string {
    return `redis://127.0.0.1:${this.port}`;
  }

  async start(): Promise<void> {
    this.server = createServer((client) => this.accept(client));
    await new Promise<void>((res) => this.server!.listen(0, '127.0.0.1', res));
    this.port = (this.server.address() as { port: number }).port;
  }

  /** Points the proxy at another server (a restarted redis-server on a new port). */
  retarget(port: number): void {
    this.target.port = port;
  }

  /** Closes every open connection (clients see a reset; ioredis reconnects). */
  cutAll(): void {
    for (const s of this.sockets) s.destroy();
    this.sockets.clear();
  }

  async stop(): Promise<void> {
    this.cutAll();
    await new Promise<void>((res) => (this.server ? this.server.close(() => res()) : res()));
  }

  private accept(client: Socket): void {
    if (this.mode === 'refuse') {
      client.destroy();
      return;
    }
    const upstream = connect(this.target.port, this.target.host);
    this.sockets.add(client);
    this.sockets.add(upstream);
    const close = (): void => {
      client.destroy();
      upstream.destroy();
      this.sockets.delete(client);
      this.sockets.delete(upstream);
    };
    client.on('error', close);
    upstream.on('error', close);
    client.on('close', close);
    upstream.on('close', close);
    client.on('data', (d) => {
      if (this.mode === 'refuse') return close();
      upstream.write(d);
    });
    upstream.on('data', (d) => {
      if (this.mode === 'drop-replies') {
        // The server executed what it answers here; the client never learns it.
        this.cuts++;
        return close();
      }
      client.write(d);
    });
  }
}
