// defines: WindowSettings, DEFAULT_WINDOWS, resolveWindows, ResolvedWindows — the one place
// where the window settings a user asks for (max length, stride, question length) are
// filled in and checked against the reader that will read them, for training,
// evaluation, asking and the statistics alike.
//
// Rules, in order:
//   1. max length: the asked value, or 384; never more than the reader's position table
//      (max_position_embeddings), with a note when it is cut
//   2. question tokens: the asked value, or 64 but at most a third of the window (also
//      when an asked value no longer fits a window cut in step 1)
//   3. stride: the asked value, or 128 but at most half the window's context room,
//      so a short window (--max-len 128) gets a stride that fits (also when an asked
//      stride no longer fits a window cut in step 1)
//   4. the stride must be below the context room beside the longest question:
//      max length − question tokens − 3 special tokens
//   5. question match: from the reader's config (src/model/config.ts), never from the user
import type { ReaderConfig } from '../model/config.js';
import { DEFAULT_FEATURE_OPTIONS, type FeatureOptions } from '../text/features.js';

/** The settings as a user names them (TrainConfig uses the same three names). */
export interface WindowSettings {
  /** tokens per window, `[CLS] question [SEP] context [SEP]` included */
  maxLength: number;
  /** context tokens shared by neighbouring windows of one long passage */
  stride: number;
  /** question tokens kept; longer questions are cut */
  maxQueryLength: number;
}

/** 384 / 128 / 64, the usual SQuAD settings (src/text/features.ts says where they come from). */
export const DEFAULT_WINDOWS: Readonly<WindowSettings> = Object.freeze({
  maxLength: DEFAULT_FEATURE_OPTIONS.maxLength,
  stride: DEFAULT_FEATURE_OPTIONS.stride,
  maxQueryLength: DEFAULT_FEATURE_OPTIONS.maxQueryLength,
});

export interface ResolvedWindows {
  settings: WindowSettings;
  /** what the feature builder takes */
  features: FeatureOptions;
  /** things the user should know (a window cut to the position table) */
  notes: string[];
}

/** Throws a RangeError naming the setting when a value cannot work. */
export function resolveWindows(
  asked: Partial<WindowSettings>,
  reader: Pick<ReaderConfig, 'maxPositions' | 'questionMatch'>,
): ResolvedWindows {
  const notes: string[] = [];
  const whole = (name: keyof WindowSettings, v: number | undefined, min: number) => {
    if (v !== undefined && (!Number.isInteger(v) || v < min))
      throw new RangeError(`${name} must be a whole number of at least ${min}, not ${v}`);
  };
  whole('maxLength', asked.maxLength, 8);
  whole('stride', asked.stride, 0);
  whole('maxQueryLength', asked.maxQueryLength, 1);
  // 1.
  let maxLength = asked.maxLength ?? DEFAULT_WINDOWS.maxLength;
  let cut = false;
  if (maxLength > reader.maxPositions) {
    if (asked.maxLength !== undefined)
      notes.push(`the reader has ${reader.maxPositions} positions; windows are ${reader.maxPositions} tokens, not ${maxLength}`);
    maxLength = reader.maxPositions;
    cut = true;
  }
  // 2. (a window cut to the position table cuts the asked question length with it)
  const third = Math.floor(maxLength / 3);
  const maxQueryLength =
    asked.maxQueryLength === undefined
      ? Math.min(DEFAULT_WINDOWS.maxQueryLength, third)
      : cut
        ? Math.min(asked.maxQueryLength, third)
        : asked.maxQueryLength;
  const room = maxLength - maxQueryLength - 3;
  if (room < 1) throw new RangeError(`maxQueryLength ${maxQueryLength} leaves no room for context in a window of ${maxLength} tokens`);
  // 3. (likewise the stride)
  const fitting = Math.min(DEFAULT_WINDOWS.stride, Math.floor(room / 2));
  const stride = asked.stride === undefined ? fitting : cut && asked.stride >= room ? fitting : asked.stride;
  // 4.
  if (stride >= room) {
    throw new RangeError(
      `stride ${stride} must be below the ${room} context tokens a window holds beside the longest question ` +
        `(max length ${maxLength} − question tokens ${maxQueryLength} − 3)`,
    );
  }
  return {
    settings: { maxLength, stride, maxQueryLength },
    // 5.
    features: { maxLength: maxLength, stride, maxQueryLength: maxQueryLength, questionMatch: reader.questionMatch },
    notes,
  };
}

/**
 * The training settings of a practice stage: `base` (the run's other settings) with its
 * own passes and window length, 16 windows per update, half the context room shared by
 * neighbouring windows, no evaluation (practice has no validation questions) and a
 * checkpoint every 200 updates, so a stopped stage loses little.
 */
export function practiceTrainSettings<
  T extends WindowSettings & { epochs: number; batchSize: number; gradAccumulation: number; evalEvery: number; checkpointEvery: number },
>(base: T, stage: { epochs: number; maxLength: number }): T {
  const maxQueryLength = Math.min(48, Math.floor(stage.maxLength / 3));
  const room = stage.maxLength - maxQueryLength - 3;
  return {
    ...base,
    epochs: stage.epochs,
    maxLength: stage.maxLength,
    maxQueryLength,
    stride: Math.max(0, Math.floor(room / 2)),
    batchSize: 16,
    gradAccumulation: 1,
    evalEvery: 0,
    checkpointEvery: 200,
  };
}

/**
 * The training settings of a masked-LM stage on the user's passages: `base` with rows of
 * 128 tokens (the length most of the shipped base's pretraining used), 16 rows per update,
 * a tenth of the fine-tuning peak rate (continued pretraining keeps its rate low;
 * Gururangan et al. 2020 — their exact rate from memory, not used), BERT's 15% masking,
 * one pass (ReaderSession.domainPretrain sets the passes from its time budget), and a
 * checkpoint every 100 updates.
 */
export function domainTrainSettings<
  T extends WindowSettings & {
    epochs: number;
    batchSize: number;
    gradAccumulation: number;
    evalEvery: number;
    checkpointEvery: number;
    learningRate: number;
  },
>(base: T): T {
  return {
    ...base,
    maxLength: 128,
    stride: 32,
    maxQueryLength: 16,
    batchSize: 16,
    gradAccumulation: 1,
    learningRate: base.learningRate / 10,
    evalEvery: 0,
    checkpointEvery: 100,
    epochs: 1,
  };
}
