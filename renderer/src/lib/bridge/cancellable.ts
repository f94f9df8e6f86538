/**
 * Engine requests the user can stop (dose advice, reading a file): each carries a request id
 * of its own, and stopping it sends the scope's cancel channel with that id, so main stops the
 * job in its worker (the same path as a fit's cancel) instead of only dropping the answer.
 */
let counter = 0;

/** A fresh request id (letters, digits and '-', well under the 80 characters an id may have). */
export function newRequestId(prefix: string): string {
  counter = (counter + 1) % 1_000_000;
  const random = Math.floor(Math.random() * 2 ** 32).toString(36);
  return `${prefix}-${Date.now().toString(36)}-${counter.toString(36)}-${random}`;
}

/**
 * The one running request of a view: `start` gives the id for a new request and stops the one
 * before it (a newer request replaces it); `stop` stops the running one; `done` forgets an id
 * whose answer has arrived.
 */
export class RunningRequest {
  private current: string | null = null;
  constructor(
    private readonly prefix: string,
    private readonly sendCancel: (requestId: string) => Promise<unknown>,
  ) {}

  get id(): string | null {
    return this.current;
  }

  start(): string {
    this.stop();
    this.current = newRequestId(this.prefix);
    return this.current;
  }

  /** Ask main to stop the running request's job; its answer (kind 'cancelled') is ignored by the caller. */
  stop(): void {
    const id = this.current;
    this.current = null;
    if (id !== null) void this.sendCancel(id).catch(() => undefined);
  }

  done(id: string): void {
    if (this.current === id) this.current = null;
  }
}
