// defines: squadPassageId, contextPassageId, fnv1a64 — how a passage gets its id when the
// file does not name one.
//
// - SQuAD files have no paragraph ids. A paragraph's id is `<title>/p<index>`: the
//   article title and the paragraph's 0-based index within the article. When two
//   articles share a title, the article's index joins the title: `<title>~<article>/p<index>`.
//   An article without a usable title is called `article<index>`. A paragraph may carry
//   `passage_id` (a Spanwright extension that other SQuAD readers ignore) to keep any
//   other id through a round trip; the exporter writes it only where the derived id
//   would differ.
// - JSONL and CSV rows without `passage_id` get `ctx-` + the FNV-1a 64-bit hash of the
//   context (over its UTF-16 code units), so questions with the same context share a
//   passage and the id does not depend on row order.

/** `<title>/p<index>` (see above); `titleIsShared` adds the article index. */
export function squadPassageId(title: unknown, articleIndex: number, paragraphIndex: number, titleIsShared: boolean): string {
  const base = usableTitle(title) ?? `article${articleIndex}`;
  const article = usableTitle(title) !== null && titleIsShared ? `${base}~${articleIndex}` : base;
  return `${article}/p${paragraphIndex}`;
}

/** The title as an id part, or null when it cannot be one. */
export function usableTitle(title: unknown): string | null {
  return typeof title === 'string' && title.trim() !== '' ? title : null;
}

/** The id of a passage known only by its text. */
export function contextPassageId(context: string): string {
  return `ctx-${fnv1a64(context)}`;
}

/**
 * FNV-1a, 64-bit (Fowler, Noll, Vo), over UTF-16 code units, as 16 hex digits. For ASCII
 * text this equals the byte-wise hash. The 64-bit product is done in two 32-bit halves:
 * the prime is 2^40 + 0x1b3, so h·prime = h·0x1b3 + (h << 40).
 */
export function fnv1a64(text: string): string {
  let hi = 0xcbf29ce4;
  let lo = 0x84222325;
  for (let i = 0; i < text.length; i++) {
    lo = (lo ^ text.charCodeAt(i)) >>> 0;
    const loProduct = lo * 0x1b3; // < 2^41, exact in a double
    const carry = Math.floor(loProduct / 0x100000000);
    hi = (Math.imul(hi, 0x1b3) + carry + (lo << 8)) >>> 0;
    lo = loProduct >>> 0;
  }
  return hi.toString(16).padStart(8, '0') + lo.toString(16).padStart(8, '0');
}
