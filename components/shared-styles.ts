// defines: screenStyles — the look every screen shares (buttons, fields, tables,
// notices), so each element's own static styles hold only what is particular to it.
import { css } from 'lit';

export const screenStyles = css`
  :host {
    display: block;
  }
  h2 {
    font-size: 1.25rem;
    margin: 0 0 0.75rem;
  }
  h3 {
    font-size: 1.05rem;
    margin: 1.25rem 0 0.5rem;
  }
  section {
    background: var(--panel, #fff);
    border: 1px solid var(--line, #ccc);
    border-radius: 6px;
    padding: 0.9rem 1rem;
    margin-bottom: 1rem;
  }
  button {
    font: inherit;
    padding: 0.35rem 0.8rem;
    border-radius: 4px;
    border: 1px solid var(--accent, #1f5f8b);
    background: var(--panel, #fff);
    color: var(--accent, #1f5f8b);
    cursor: pointer;
  }
  button.primary {
    background: var(--accent, #1f5f8b);
    color: var(--accent-ink, #fff);
  }
  button:disabled {
    opacity: 0.5;
    cursor: default;
  }
  button:focus-visible,
  input:focus-visible,
  select:focus-visible,
  textarea:focus-visible,
  a:focus-visible {
    outline: 2px solid var(--accent, #1f5f8b);
    outline-offset: 2px;
  }
  input,
  select,
  textarea {
    font: inherit;
    padding: 0.25rem 0.4rem;
    border: 1px solid var(--line, #ccc);
    border-radius: 4px;
    background: #fff;
    color: inherit;
  }
  textarea {
    width: 100%;
    box-sizing: border-box;
  }
  table {
    border-collapse: collapse;
    width: 100%;
    font-size: 0.92rem;
  }
  th,
  td {
    text-align: left;
    padding: 0.3rem 0.5rem;
    border-bottom: 1px solid var(--line, #ccc);
    vertical-align: top;
  }
  th {
    font-weight: 600;
  }
  td.num,
  th.num {
    text-align: right;
    font-variant-numeric: tabular-nums;
  }
  .row {
    display: flex;
    flex-wrap: wrap;
    gap: 0.5rem;
    align-items: center;
  }
  .spaced {
    margin-top: 0.5rem;
  }
  .grow {
    flex: 1;
  }
  .grow input {
    width: 100%;
    box-sizing: border-box;
  }
  .muted {
    color: var(--muted, #666);
  }
  .note {
    border-left: 4px solid var(--accent, #1f5f8b);
    padding: 0.4rem 0.7rem;
    background: #eef4f8;
    margin: 0.5rem 0;
  }
  .note.warn {
    border-color: var(--warn, #8a5a00);
    background: #fbf3e4;
  }
  .note.bad {
    border-color: var(--bad, #a3262a);
    background: #fbeaea;
  }
  .caution {
    border: 2px solid var(--warn, #8a5a00);
    background: #fff8e6;
    padding: 0.5rem 0.75rem;
    border-radius: 4px;
  }
  .error {
    color: var(--bad, #a3262a);
  }
  /* a table or chart wider than its place scrolls inside it, never the page sideways */
  .scroll {
    overflow-x: auto;
    max-width: 100%;
  }
  section {
    overflow-x: auto;
  }
  code {
    overflow-wrap: anywhere;
  }
  @media (max-width: 640px) {
    section {
      padding: 0.6rem 0.6rem;
    }
    th,
    td {
      padding: 0.25rem 0.3rem;
    }
    table {
      font-size: 0.85rem;
    }
  }
  .grid {
    display: grid;
    grid-template-columns: repeat(auto-fill, minmax(320px, 1fr));
    gap: 0.75rem;
  }
`;
