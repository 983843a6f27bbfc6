// The words people see for a checkpoint and its measurements (src/session/labels.ts):
// the project's own naming rules, no outside reference.
import { describe, expect, it } from 'vitest';
import { checkpointLabel, metricLabel, stageLabel } from '../../src/session/labels.js';

describe('checkpoint labels', () => {
  it('name the stage and the update instead of the store id', () => {
    expect(checkpointLabel({ stage: 'fine-tune', step: 120 })).toBe('fine-tuned, update 120');
    expect(checkpointLabel({ step: 7 })).toBe('fine-tuned, update 7'); // older checkpoints carry no stage
    expect(checkpointLabel({ stage: 'practice', step: 200 })).toBe('practice, update 200');
    expect(checkpointLabel({ stage: 'domain', step: 100 })).toBe('masked-LM, update 100');
  });

  it('name the stages as the checkpoint table does', () => {
    expect([stageLabel('fine-tune'), stageLabel(undefined), stageLabel('practice'), stageLabel('domain')]).toEqual([
      'fine-tuning',
      'fine-tuning',
      'practice',
      'masked-LM',
    ]);
  });

  it('name the metrics for people, and split an unknown key', () => {
    expect(metricLabel('validationF1')).toBe('validation F1');
    expect(metricLabel('validationEM')).toBe('validation EM');
    expect(metricLabel('loss')).toBe('training loss');
    expect(metricLabel('noAnswerShare')).toBe('no answer share');
  });
});
