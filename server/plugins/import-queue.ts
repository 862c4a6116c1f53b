/**
 * One writer at a time. Imports run strictly one after another, in arrival order, so two
 * uploads never compete for the store's write lock ("database is locked" never reaches a user)
 * and shutdown can wait for the import in progress instead of cutting it in half.
 */
import { AppError } from '../errors.js';

export class ImportQueue {
  private tail: Promise<unknown> = Promise.resolve();
  private nWaitingOrRunning = 0;
  private isClosed = false;

  /** Runs the task after every earlier one has settled. Refused once the queue is closed. */
  run<T>(task: () => Promise<T>): Promise<T> {
    if (this.isClosed) return Promise.reject(new AppError('SHUTTING_DOWN'));
    this.nWaitingOrRunning += 1;
    const result = this.tail.then(task);
    this.tail = result
      .catch(() => undefined)
      .finally(() => {
        this.nWaitingOrRunning -= 1;
      });
    return result;
  }

  /** Imports waiting or running now. */
  get size(): number {
    return this.nWaitingOrRunning;
  }

  get closed(): boolean {
    return this.isClosed;
  }

  /** Resolves when every import accepted so far has finished. */
  async idle(): Promise<void> {
    for (;;) {
      const tail = this.tail;
      await tail;
      if (tail === this.tail) return;
    }
  }

  /** Refuses new imports and waits for those already accepted. */
  async close(): Promise<void> {
    this.isClosed = true;
    await this.idle();
  }
}
