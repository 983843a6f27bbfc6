// defines: trainingProgress, countProgress — progress bars on stderr (cli-progress) for
// the training loop's events and for long passes; silent when stderr is not a terminal
// except for a line per epoch, so logs stay readable.
import cliProgress from 'cli-progress';
import type { LoopEvent } from '../train/loop.js';

function formatEta(ms: number): string {
  if (!Number.isFinite(ms) || ms < 0) return '–';
  const s = Math.round(ms / 1000);
  const m = Math.floor(s / 60);
  return m > 0 ? `${m}m${String(s % 60).padStart(2, '0')}s` : `${s}s`;
}

/** Renders the loop's events: a bar with loss, tokens/s and ETA; metrics when evaluated. */
export function trainingProgress(label = 'training'): { onEvent: (e: LoopEvent) => void; stop: () => void } {
  const tty = process.stderr.isTTY === true;
  const bar = tty
    ? new cliProgress.SingleBar(
        {
          format: `${label} [{bar}] {value}/{total} updates | loss {loss} | {tps} tok/s | ETA {etaText}`,
          hideCursor: true,
          stream: process.stderr,
        },
        cliProgress.Presets.shades_classic,
      )
    : null;
  let lastEpoch = -1;
  let smoothed: number | null = null;
  const onEvent = (e: LoopEvent) => {
    switch (e.type) {
      case 'start':
        bar?.start(e.plan.totalUpdates, e.startUpdate, { loss: '–', tps: '–', etaText: '–' });
        if (!tty)
          process.stderr.write(
            `${label}: ${e.plan.totalUpdates} updates (${e.plan.epochs} epochs × ${e.plan.updatesPerEpoch}), starting at ${e.startUpdate}\n`,
          );
        break;
      case 'progress': {
        smoothed = smoothed === null ? e.loss : 0.9 * smoothed + 0.1 * e.loss;
        const payload = { loss: smoothed.toFixed(3), tps: Math.round(e.tokensPerSecond).toString(), etaText: formatEta(e.etaMs) };
        bar?.update(e.update, payload);
        if (!tty && (e.epoch !== lastEpoch || e.update === e.totalUpdates)) {
          process.stderr.write(
            `${label}: update ${e.update}/${e.totalUpdates} epoch ${e.epoch + 1} loss ${payload.loss} ${payload.tps} tok/s ETA ${payload.etaText}\n`,
          );
        }
        lastEpoch = e.epoch;
        break;
      }
      case 'evaluated': {
        const m = e.metrics;
        const line =
          `validation at update ${e.update}: EM ${m.validationEM?.toFixed(1)} F1 ${m.validationF1?.toFixed(1)}` +
          (m.bestCutF1 !== undefined ? ` (best no-answer cut: F1 ${m.bestCutF1.toFixed(1)})` : '');
        if (bar) bar.stop();
        process.stderr.write(`${line}\n`);
        if (bar && e.update < (bar.getTotal?.() ?? Infinity))
          bar.start(bar.getTotal(), e.update, { loss: smoothed?.toFixed(3) ?? '–', tps: '–', etaText: '–' });
        break;
      }
      case 'checkpoint':
        break;
    }
  };
  return { onEvent, stop: () => bar?.stop() };
}

/** A bar for `total` items of some pass (evaluation windows, say). */
export function countProgress(label: string): { update: (done: number, total: number) => void; stop: () => void } {
  if (process.stderr.isTTY !== true) return { update: () => undefined, stop: () => undefined };
  const bar = new cliProgress.SingleBar(
    { format: `${label} [{bar}] {value}/{total}`, stream: process.stderr, hideCursor: true },
    cliProgress.Presets.shades_classic,
  );
  let started = false;
  return {
    update: (done, total) => {
      if (!started) {
        bar.start(total, 0);
        started = true;
      }
      bar.update(done);
    },
    stop: () => {
      if (started) bar.stop();
    },
  };
}
