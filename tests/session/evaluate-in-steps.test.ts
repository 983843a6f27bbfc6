// ReaderSession.evaluateInSteps (the workbench's evaluation with progress and a cancel)
// against ReaderSession.evaluate: the same scores and per-question views, progress
// counted in questions, and a cancel that ends it between steps. The project's own
// rules; the reader is a small random one (tests/helpers/tiny-session.ts).
import { describe, expect, it } from 'vitest';
import { useBackend } from '../helpers/backend.js';
import { factbookYearRecords, tinySession } from '../helpers/tiny-session.js';

const windows = { maxLength: 64, stride: 16, maxQueryLength: 16 };

describe('evaluation in steps', () => {
  it('scores as evaluate does, reporting questions done of all', async () => {
    await useBackend('wasm');
    const session = tinySession(null);
    const records = factbookYearRecords(['europe/au', 'africa/ke', 'europe/ei', 'south-america/br', 'europe/fr']);
    const whole = session.evaluate({ model: 'base', records, ...windows });
    const progress: Array<[number, number]> = [];
    const stepped = await session.evaluateInSteps({
      evaluationId: 'e1',
      model: 'base',
      records,
      step: 3,
      ...windows,
      onProgress: (done, total) => progress.push([done, total]),
    });
    expect(stepped.status).toBe('finished');
    if (stepped.status !== 'finished') return;
    expect(stepped.result).toEqual(whole);
    expect(progress).toEqual([
      [0, 10],
      [3, 10],
      [6, 10],
      [9, 10],
      [10, 10],
    ]);
    session.dispose();
  }, 60_000);

  it('ends after the step in hand when cancelled, and frees the session for the next one', async () => {
    await useBackend('wasm');
    const session = tinySession(null);
    const records = factbookYearRecords(['europe/au', 'africa/ke', 'europe/ei']);
    const running = session.evaluateInSteps({
      evaluationId: 'e2',
      model: 'base',
      records,
      step: 2,
      ...windows,
      onProgress: (done) => {
        if (done === 2) session.cancelEvaluation({ evaluationId: 'e2' });
      },
    });
    await expect(session.evaluateInSteps({ evaluationId: 'e3', model: 'base', records, ...windows })).rejects.toThrow(/already running/);
    expect(session.cancelEvaluation({ evaluationId: 'other' })).toEqual({ accepted: false });
    await expect(running).resolves.toEqual({ status: 'cancelled', done: 2, total: 6 });
    await expect(session.evaluateInSteps({ evaluationId: 'e4', model: 'base', records, ...windows })).resolves.toHaveProperty(
      'status',
      'finished',
    );
    session.dispose();
  }, 60_000);
});
