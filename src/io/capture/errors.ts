// The error raised for a capture file that cannot be read as declared: it names the file, the place and what was expected.

/** Longest quoted excerpt of the offending text kept in a message; longer lines are cut with "...". */
const MAX_EXCERPT_CHARS = 120;

export interface CaptureFormatErrorDetails {
  /** The path as the caller gave it. */
  readonly file: string;
  /** 1-based line number in a text file, or null when the place is a byte offset. */
  readonly line?: number | null;
  /** 0-based byte offset from the start of the file, or null when the place is a line. */
  readonly byteOffset?: number | null;
  /** What the reader needed at that place, in words (`3 columns (t,x,y)`). */
  readonly expected: string;
  /** What it found, quoted in the message when given. */
  readonly got?: string | null;
}

/**
 * A capture file is malformed, truncated or of an unsupported kind. Readers throw it at the bad place, after
 * every good block before it has been delivered, so a consumer knows exactly how far the data can be trusted.
 */
export class CaptureFormatError extends Error {
  override readonly name = 'CaptureFormatError';
  readonly file: string;
  readonly line: number | null;
  readonly byteOffset: number | null;
  readonly expected: string;
  readonly got: string | null;

  constructor(details: CaptureFormatErrorDetails) {
    super(formatMessage(details));
    this.file = details.file;
    this.line = details.line ?? null;
    this.byteOffset = details.byteOffset ?? null;
    this.expected = details.expected;
    this.got = details.got ?? null;
  }
}

function formatMessage(details: CaptureFormatErrorDetails): string {
  let place = details.file;
  if (details.line !== undefined && details.line !== null) place += ` line ${details.line}`;
  else if (details.byteOffset !== undefined && details.byteOffset !== null) place += ` byte ${details.byteOffset}`;
  const got = details.got === undefined || details.got === null ? '' : `, got "${excerpt(details.got)}"`;
  return `${place}: expected ${details.expected}${got}`;
}

function excerpt(text: string): string {
  return text.length <= MAX_EXCERPT_CHARS ? text : `${text.slice(0, MAX_EXCERPT_CHARS)}...`;
}
