/** The import queue runs one import at a time, in arrival order, and lets shutdown wait. */
import { describe, expect, it } from 'vitest';
import { AppError } from '../../server/errors.js';
import { ImportQueue } from '../../server/plugins/import-queue.js';

const pause = (ms: number) => new Promise((resolve) => setTimeout(resolve, ms));

describe('ImportQueue', () => {
  it('never runs two tasks at once and keeps their order, failures included', async () => {
    const queue = new ImportQueue();
    const log: string[] = [];
    let nRunning = 0;
    let maxRunning = 0;
    const task = (name: string, ms: number, fail = false) => async () => {
      nRunning += 1;
      maxRunning = Math.max(maxRunning, nRunning);
      log.push(`start ${name}`);
      await pause(ms);
      log.push(`end ${name}`);
      nRunning -= 1;
      if (fail) throw new Error(`${name} failed`);
      return name;
    };
    const results = await Promise.allSettled([queue.run(task('a', 20)), queue.run(task('b', 5, true)), queue.run(task('c', 1))]);
    expect(maxRunning).toBe(1);
    expect(log).toEqual(['start a', 'end a', 'start b', 'end b', 'start c', 'end c']);
    expect(results.map((r) => r.status)).toEqual(['fulfilled', 'rejected', 'fulfilled']);
    expect(queue.size).toBe(0);
  });

  it('waits for the running import on close and refuses new ones', async () => {
    const queue = new ImportQueue();
    let isFinished = false;
    const running = queue.run(async () => {
      await pause(30);
      isFinished = true;
    });
    await queue.close();
    expect(isFinished).toBe(true);
    await running;
    await expect(queue.run(async () => 1)).rejects.toBeInstanceOf(AppError);
    await expect(queue.run(async () => 1)).rejects.toMatchObject({ code: 'SHUTTING_DOWN', status: 503 });
  });
});
