/*
 * fringetally_wire.h - header-only encoder for the fringetally serial frame, version 1.
 * For firmware: C99, no dynamic memory, no library calls, output independent of the CPU's byte order.
 * Layout, CRC and sequence rules: docs/wire-format.md. CRC-32C (Castagnoli) with a 16-entry table.
 *
 * Use: either ft_wire_encode() from a sample array, or, to build the frame in place (e.g. in a DMA
 * buffer), ft_wire_write_header(), then write the samples at out + header size, then ft_wire_finish().
 */
#ifndef FRINGETALLY_WIRE_H
#define FRINGETALLY_WIRE_H

#include <stddef.h>
#include <stdint.h>

#define FT_WIRE_SYNC0 0xA5u
#define FT_WIRE_SYNC1 0x5Au
#define FT_WIRE_VERSION 1u
#define FT_WIRE_FORMAT_INT16LE 1u
#define FT_WIRE_FLAG_SAMPLE_RATE 0x01u
#define FT_WIRE_FLAG_TIMESTAMP 0x02u
#define FT_WIRE_FIXED_HEADER_BYTES 10u
#define FT_WIRE_CRC_BYTES 4u
#define FT_WIRE_MAX_CHANNELS 16u
#define FT_WIRE_MAX_SAMPLES_PER_FRAME 4096u
/* Largest frame: header, both optional fields, payload, CRC. */
#define FT_WIRE_MAX_FRAME_BYTES \
  (FT_WIRE_FIXED_HEADER_BYTES + 8u + FT_WIRE_MAX_CHANNELS * FT_WIRE_MAX_SAMPLES_PER_FRAME * 2u + FT_WIRE_CRC_BYTES)

typedef struct {
  uint16_t sequence;          /* +1 per frame, wraps 65535 -> 0 */
  uint8_t channel_count;      /* even, 2..16; channel 2k = x, 2k+1 = y of axis k */
  uint8_t flags;              /* FT_WIRE_FLAG_* bits; others must be 0 */
  uint16_t samples_per_frame; /* samples per channel, 1..4096 */
  uint32_t sample_rate_hz;    /* sent when FT_WIRE_FLAG_SAMPLE_RATE is set (must be >= 1) */
  uint32_t timestamp_us;      /* device time of the first sample, sent when FT_WIRE_FLAG_TIMESTAMP is set */
} ft_wire_header;

/* CRC-32C, reflected polynomial 0x82F63B78, processed a nibble at a time (64-byte table). */
static inline uint32_t ft_wire_crc32c_update(uint32_t state, const uint8_t *data, size_t length) {
  static const uint32_t nibble_table[16] = {
      0x00000000u, 0x105EC76Fu, 0x20BD8EDEu, 0x30E349B1u, 0x417B1DBCu, 0x5125DAD3u, 0x61C69362u, 0x7198540Du,
      0x82F63B78u, 0x92A8FC17u, 0xA24BB5A6u, 0xB21572C9u, 0xC38D26C4u, 0xD3D3E1ABu, 0xE330A81Au, 0xF36E6F75u};
  size_t i;
  for (i = 0; i < length; i++) {
    state = (state >> 4) ^ nibble_table[(state ^ data[i]) & 0x0Fu];
    state = (state >> 4) ^ nibble_table[(state ^ ((uint32_t)data[i] >> 4)) & 0x0Fu];
  }
  return state;
}

/* Whole-buffer CRC-32C: init 0xFFFFFFFF, xorout 0xFFFFFFFF (check value 0xE3069283 for "123456789"). */
static inline uint32_t ft_wire_crc32c(const uint8_t *data, size_t length) {
  return ft_wire_crc32c_update(0xFFFFFFFFu, data, length) ^ 0xFFFFFFFFu;
}

/* Bytes before the samples: fixed header plus optional fields. */
static inline size_t ft_wire_header_size(const ft_wire_header *header) {
  size_t size = FT_WIRE_FIXED_HEADER_BYTES;
  if (header->flags & FT_WIRE_FLAG_SAMPLE_RATE) size += 4u;
  if (header->flags & FT_WIRE_FLAG_TIMESTAMP) size += 4u;
  return size;
}

/* Bytes of the whole frame, or 0 when the header is invalid. */
static inline size_t ft_wire_frame_size(const ft_wire_header *header) {
  if (header->channel_count < 2u || header->channel_count > FT_WIRE_MAX_CHANNELS || (header->channel_count & 1u) != 0u) {
    return 0;
  }
  if (header->samples_per_frame < 1u || header->samples_per_frame > FT_WIRE_MAX_SAMPLES_PER_FRAME) return 0;
  if ((header->flags & (uint8_t)~(FT_WIRE_FLAG_SAMPLE_RATE | FT_WIRE_FLAG_TIMESTAMP)) != 0u) return 0;
  if ((header->flags & FT_WIRE_FLAG_SAMPLE_RATE) && header->sample_rate_hz == 0u) return 0;
  return ft_wire_header_size(header) + (size_t)header->channel_count * header->samples_per_frame * 2u + FT_WIRE_CRC_BYTES;
}

static inline uint8_t *ft_wire_put_u32(uint8_t *at, uint32_t value) {
  at[0] = (uint8_t)(value & 0xFFu);
  at[1] = (uint8_t)((value >> 8) & 0xFFu);
  at[2] = (uint8_t)((value >> 16) & 0xFFu);
  at[3] = (uint8_t)((value >> 24) & 0xFFu);
  return at + 4;
}

/* Writes the header and optional fields; returns their size (the sample offset), or 0 when invalid or too small. */
static inline size_t ft_wire_write_header(const ft_wire_header *header, uint8_t *out, size_t capacity) {
  size_t frame_size = ft_wire_frame_size(header);
  uint8_t *at = out;
  if (frame_size == 0u || frame_size > capacity) return 0;
  *at++ = FT_WIRE_SYNC0;
  *at++ = FT_WIRE_SYNC1;
  *at++ = FT_WIRE_VERSION;
  *at++ = FT_WIRE_FORMAT_INT16LE;
  *at++ = header->channel_count;
  *at++ = header->flags;
  *at++ = (uint8_t)(header->sequence & 0xFFu);
  *at++ = (uint8_t)(header->sequence >> 8);
  *at++ = (uint8_t)(header->samples_per_frame & 0xFFu);
  *at++ = (uint8_t)(header->samples_per_frame >> 8);
  if (header->flags & FT_WIRE_FLAG_SAMPLE_RATE) at = ft_wire_put_u32(at, header->sample_rate_hz);
  if (header->flags & FT_WIRE_FLAG_TIMESTAMP) at = ft_wire_put_u32(at, header->timestamp_us);
  return (size_t)(at - out);
}

/* Stores one int16 sample little-endian at `at` (two bytes). */
static inline void ft_wire_put_sample(uint8_t *at, int16_t value) {
  uint16_t bits = (uint16_t)value;
  at[0] = (uint8_t)(bits & 0xFFu);
  at[1] = (uint8_t)(bits >> 8);
}

/* Appends the CRC to a frame whose header and samples are in place; returns the frame size, 0 when invalid. */
static inline size_t ft_wire_finish(const ft_wire_header *header, uint8_t *out, size_t capacity) {
  size_t frame_size = ft_wire_frame_size(header);
  if (frame_size == 0u || frame_size > capacity) return 0;
  ft_wire_put_u32(out + frame_size - FT_WIRE_CRC_BYTES, ft_wire_crc32c(out, frame_size - FT_WIRE_CRC_BYTES));
  return frame_size;
}

/*
 * Encodes one frame from channel_count * samples_per_frame interleaved samples (s0c0 s0c1 ... s1c0 ...).
 * Returns the bytes written, or 0 when the header is invalid or capacity is too small.
 * The caller increments header->sequence after each frame it sends.
 */
static inline size_t ft_wire_encode(const ft_wire_header *header, const int16_t *samples, uint8_t *out, size_t capacity) {
  size_t offset = ft_wire_write_header(header, out, capacity);
  size_t count, i;
  if (offset == 0u) return 0;
  count = (size_t)header->channel_count * header->samples_per_frame;
  for (i = 0; i < count; i++) ft_wire_put_sample(out + offset + 2u * i, samples[i]);
  return ft_wire_finish(header, out, capacity);
}

#endif /* FRINGETALLY_WIRE_H */
