// RIFF/WAVE bytes assembled by hand for tests, following the Microsoft/IBM "Multimedia Programming Interface and
// Data Specifications 1.0" (1991): 4-byte chunk id, little-endian uint32 size, body padded to an even length.

export function u16(value: number): number[] {
  return [value & 0xff, (value >> 8) & 0xff];
}
export function u32(value: number): number[] {
  return [value & 0xff, (value >>> 8) & 0xff, (value >>> 16) & 0xff, (value >>> 24) & 0xff];
}
export function ascii(text: string): number[] {
  return [...text].map((c) => c.charCodeAt(0));
}
export function chunk(id: string, body: number[]): number[] {
  return [...ascii(id), ...u32(body.length), ...body, ...(body.length % 2 === 1 ? [0] : [])];
}
export function fmtBody(tag: number, channels: number, rateHz: number, bits: number): number[] {
  const blockAlign = (channels * bits) / 8;
  return [...u16(tag), ...u16(channels), ...u32(rateHz), ...u32(rateHz * blockAlign), ...u16(blockAlign), ...u16(bits)];
}
export function riff(chunks: number[][]): Buffer {
  const body = [...ascii('WAVE'), ...chunks.flat()];
  return Buffer.from([...ascii('RIFF'), ...u32(body.length), ...body]);
}
