/** Reads a command-line channel argument: all digits means a 1-based position, anything else a name. */
export function parseChannelSelector(text: string): string | number {
  return /^[0-9]+$/.test(text) ? Number(text) : text;
}
