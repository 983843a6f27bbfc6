// <marked-passage> — a passage with character spans marked: gold answers and the
// reader's prediction (or any spans handed in). The text is split at the span edges and
// each piece rendered as a text binding, so markup inside a passage shows as text.
// No events out.
import { LitElement, css, html } from 'lit';
import { customElement, property } from 'lit/decorators.js';

export interface Mark {
  start: number;
  end: number;
  /** a gold answer, the reader's prediction, or the answer being chosen while labelling */
  kind: 'gold' | 'guess' | 'chosen';
}

const TITLES: Record<Mark['kind'], string> = { gold: 'gold answer', guess: 'prediction', chosen: 'the answer chosen' };

@customElement('marked-passage')
export class MarkedPassage extends LitElement {
  static override styles = css`
    :host {
      display: block;
      white-space: pre-wrap;
      line-height: 1.55;
      font-size: 0.92rem;
    }
    mark {
      background: none;
      color: inherit;
      border-radius: 2px;
    }
    mark.gold {
      background: var(--gold, #f3df8f);
    }
    mark.guess {
      box-shadow: inset 0 -0.45em 0 var(--guess, #b9d7ef);
    }
    mark.chosen {
      outline: 2px solid var(--accent, #1f5f8b);
      outline-offset: -1px;
    }
    mark.gold.guess {
      background: var(--gold, #f3df8f);
      box-shadow: inset 0 -0.45em 0 var(--guess, #b9d7ef);
    }
  `;

  /** the passage text */
  @property() text = '';
  /** character spans [start, end) into `text` */
  @property({ attribute: false }) marks: Mark[] = [];

  override render() {
    // every span edge cuts the text; each piece carries the kinds of marks covering it
    const cuts = new Set([0, this.text.length]);
    for (const m of this.marks) {
      cuts.add(Math.max(0, Math.min(this.text.length, m.start)));
      cuts.add(Math.max(0, Math.min(this.text.length, m.end)));
    }
    const edges = [...cuts].sort((a, b) => a - b);
    const pieces = [];
    for (let i = 0; i + 1 < edges.length; i++) {
      const [a, b] = [edges[i]!, edges[i + 1]!];
      const piece = this.text.slice(a, b);
      const kinds = [...new Set(this.marks.filter((m) => m.start <= a && m.end >= b).map((m) => m.kind))];
      pieces.push(
        kinds.length > 0 ? html`<mark class=${kinds.join(' ')} title=${kinds.map((k) => TITLES[k]).join(' + ')}>${piece}</mark>` : piece,
      );
    }
    return html`${pieces}`;
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'marked-passage': MarkedPassage;
  }
}
