/*
 * fringetally_wire.h - header-only encoder for the fringetally serial frame, versions 1 to 3.
 * For firmware: C99, no dynamic memory, no library calls, output independent of the CPU's byte order.
 * Layout, CRC and sequence rules: docs/wire-format.md. CRC-32C (Castagnoli) with a 16-entry table.
 *
 * Use: either ft_wire_encode() from a sample array, or, to build the frame in place (e.g. in a DMA
 * buffer), write the samples at out + ft_wire_header_size(), then ft_wire_write_header(), then ft_wire_finish().
 * The header size depends on the flags only, so the samples' place is known before the edges are; write the
 * header once the frame's sampling has ended, when the edge count is final.
 * A frame is version 3 when it carries a channel layout, else version 2 when it carries the sample counter or
 * edges, else version 1.
 */
#ifndef FRINGETALLY_WIRE_H
#define FRINGETALLY_WIRE_H

#include <stddef.h>
#include <stdint.h>

#define FT_WIRE_SYNC0 0xA5u
#define FT_WIRE_SYNC1 0x5Au
#define FT_WIRE_VERSION 1u
#define FT_WIRE_VERSION_2 2u
#define FT_WIRE_VERSION_3 3u
#define FT_WIRE_FORMAT_INT16LE 1u
#define FT_WIRE_FLAG_SAMPLE_RATE 0x01u
#define FT_WIRE_FLAG_TIMESTAMP 0x02u
#define FT_WIRE_FLAG_SAMPLE_COUNTER 0x04u /* version 2 */
#define FT_WIRE_FLAG_EDGES 0x08u          /* version 2 */
#define FT_WIRE_FLAG_CHANNEL_LAYOUT 0x10u /* version 3 */
#define FT_WIRE_KNOWN_FLAGS 0x1Fu
#define FT_WIRE_FIXED_HEADER_BYTES 10u
#define FT_WIRE_EDGE_BYTES 6u
#define FT_WIRE_CRC_BYTES 4u
#define FT_WIRE_MAX_CHANNELS 16u
#define FT_WIRE_MAX_SAMPLES_PER_FRAME 4096u
#define FT_WIRE_MAX_EDGES_PER_FRAME 256u
#define FT_WIRE_MAX_EDGE_LINE 7u
#define FT_WIRE_EDGE_LINE_TRIGGER 0u
#define FT_WIRE_EDGE_LINE_REFERENCE_MARK 1u
/* Largest frame: header, every optional field, payload, the most edges, CRC. */
#define FT_WIRE_MAX_FRAME_BYTES                                                                          \
  (FT_WIRE_FIXED_HEADER_BYTES + 18u + FT_WIRE_MAX_CHANNELS * FT_WIRE_MAX_SAMPLES_PER_FRAME * 2u +        \
   FT_WIRE_MAX_EDGES_PER_FRAME * FT_WIRE_EDGE_BYTES + FT_WIRE_CRC_BYTES)

/* One edge of a digital input, timed against the sample clock (e.g. by a timer's capture unit). */
typedef struct {
  uint16_t sample; /* index in the frame of the first sample taken at or after the edge, 0..samples_per_frame-1 */
  uint16_t lead;   /* time from the edge to that sample, in 1/65536 of the sample period */
  uint8_t line;    /* 0 trigger, 1 reference mark, 2..7 further trigger inputs */
  uint8_t rising;  /* 1 rising edge, 0 falling edge */
} ft_wire_edge;

typedef struct {
  uint16_t sequence;          /* +1 per frame, wraps 65535 -> 0 */
  uint8_t channel_count;      /* 2..16: even without a layout (channel 2k = x, 2k+1 = y of axis k), else the layout's sum */
  uint8_t flags;              /* FT_WIRE_FLAG_* bits; others must be 0 */
  uint16_t samples_per_frame; /* samples per channel, 1..4096 */
  uint32_t sample_rate_hz;    /* sent when FT_WIRE_FLAG_SAMPLE_RATE is set (must be >= 1) */
  uint32_t timestamp_us;      /* device time of the first sample, sent when FT_WIRE_FLAG_TIMESTAMP is set */
  uint32_t sample_counter;    /* count of the frame's first sample, +samples_per_frame per frame, sent when FT_WIRE_FLAG_SAMPLE_COUNTER is set */
  uint16_t edge_count;        /* edges in `edges`, 0..256, sent when FT_WIRE_FLAG_EDGES is set */
  const ft_wire_edge *edges;  /* edge_count records (may be NULL when edge_count is 0) */
  uint32_t channel_layout;    /* detector outputs (2..4) of axis k in bits 4k..4k+3, 0 after the last axis;
                                 sent when FT_WIRE_FLAG_CHANNEL_LAYOUT is set, e.g. 0x3 for one three-output axis */
} ft_wire_header;

/* True when `layout` lists 1..8 axes of 2..4 outputs each (then zeros) whose sum is `channel_count`. */
static inline int ft_wire_layout_valid(uint32_t layout, unsigned channel_count) {
  unsigned sum = 0u;
  if (layout == 0u) return 0;
  while (layout != 0u) {
    unsigned outputs = (unsigned)(layout & 0x0Fu);
    if (outputs < 2u || outputs > 4u) return 0;
    sum += outputs;
    layout >>= 4;
  }
  return sum == channel_count;
}

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

/* Bytes before the samples: fixed header plus optional fields (in flag-bit order). */
static inline size_t ft_wire_header_size(const ft_wire_header *header) {
  size_t size = FT_WIRE_FIXED_HEADER_BYTES;
  if (header->flags & FT_WIRE_FLAG_SAMPLE_RATE) size += 4u;
  if (header->flags & FT_WIRE_FLAG_TIMESTAMP) size += 4u;
  if (header->flags & FT_WIRE_FLAG_SAMPLE_COUNTER) size += 4u;
  if (header->flags & FT_WIRE_FLAG_EDGES) size += 2u;
  if (header->flags & FT_WIRE_FLAG_CHANNEL_LAYOUT) size += 4u;
  return size;
}

/* Edge records sent: edge_count when FT_WIRE_FLAG_EDGES is set, else none. */
static inline size_t ft_wire_edges_sent(const ft_wire_header *header) {
  return (header->flags & FT_WIRE_FLAG_EDGES) ? (size_t)header->edge_count : 0u;
}

/* Bytes of the whole frame, or 0 when the header or an edge is invalid. */
static inline size_t ft_wire_frame_size(const ft_wire_header *header) {
  size_t e, edges = ft_wire_edges_sent(header);
  if (header->channel_count < 2u || header->channel_count > FT_WIRE_MAX_CHANNELS) return 0;
  if ((header->flags & FT_WIRE_FLAG_CHANNEL_LAYOUT) ? !ft_wire_layout_valid(header->channel_layout, header->channel_count)
                                                    : (header->channel_count & 1u) != 0u) {
    return 0;
  }
  if (header->samples_per_frame < 1u || header->samples_per_frame > FT_WIRE_MAX_SAMPLES_PER_FRAME) return 0;
  if ((header->flags & (uint8_t)~FT_WIRE_KNOWN_FLAGS) != 0u) return 0;
  if ((header->flags & FT_WIRE_FLAG_SAMPLE_RATE) && header->sample_rate_hz == 0u) return 0;
  if (edges > FT_WIRE_MAX_EDGES_PER_FRAME || (edges > 0u && header->edges == NULL)) return 0;
  for (e = 0; e < edges; e++) {
    const ft_wire_edge *edge = &header->edges[e];
    if (edge->sample >= header->samples_per_frame || edge->line > FT_WIRE_MAX_EDGE_LINE || edge->rising > 1u) return 0;
  }
  return ft_wire_header_size(header) + (size_t)header->channel_count * header->samples_per_frame * 2u +
         edges * FT_WIRE_EDGE_BYTES + FT_WIRE_CRC_BYTES;
}

static inline uint8_t *ft_wire_put_u16(uint8_t *at, uint16_t value) {
  at[0] = (uint8_t)(value & 0xFFu);
  at[1] = (uint8_t)(value >> 8);
  return at + 2;
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
  /* The lowest version that has every field used, so readers of earlier versions keep working. */
  *at++ = (header->flags & FT_WIRE_FLAG_CHANNEL_LAYOUT)                               ? FT_WIRE_VERSION_3
          : (header->flags & (FT_WIRE_FLAG_SAMPLE_COUNTER | FT_WIRE_FLAG_EDGES)) ? FT_WIRE_VERSION_2
                                                                                  : FT_WIRE_VERSION;
  *at++ = FT_WIRE_FORMAT_INT16LE;
  *at++ = header->channel_count;
  *at++ = header->flags;
  at = ft_wire_put_u16(at, header->sequence);
  at = ft_wire_put_u16(at, header->samples_per_frame);
  if (header->flags & FT_WIRE_FLAG_SAMPLE_RATE) at = ft_wire_put_u32(at, header->sample_rate_hz);
  if (header->flags & FT_WIRE_FLAG_TIMESTAMP) at = ft_wire_put_u32(at, header->timestamp_us);
  if (header->flags & FT_WIRE_FLAG_SAMPLE_COUNTER) at = ft_wire_put_u32(at, header->sample_counter);
  if (header->flags & FT_WIRE_FLAG_EDGES) at = ft_wire_put_u16(at, header->edge_count);
  if (header->flags & FT_WIRE_FLAG_CHANNEL_LAYOUT) at = ft_wire_put_u32(at, header->channel_layout);
  return (size_t)(at - out);
}

/* Stores one int16 sample little-endian at `at` (two bytes). */
static inline void ft_wire_put_sample(uint8_t *at, int16_t value) {
  uint16_t bits = (uint16_t)value;
  at[0] = (uint8_t)(bits & 0xFFu);
  at[1] = (uint8_t)(bits >> 8);
}

/*
 * Appends the edge records and the CRC to a frame whose header and samples are in place; returns the frame
 * size, 0 when invalid.
 */
static inline size_t ft_wire_finish(const ft_wire_header *header, uint8_t *out, size_t capacity) {
  size_t frame_size = ft_wire_frame_size(header);
  size_t e, edges = ft_wire_edges_sent(header);
  uint8_t *at;
  if (frame_size == 0u || frame_size > capacity) return 0;
  at = out + frame_size - FT_WIRE_CRC_BYTES - edges * FT_WIRE_EDGE_BYTES;
  for (e = 0; e < edges; e++) {
    at = ft_wire_put_u16(at, header->edges[e].sample);
    at = ft_wire_put_u16(at, header->edges[e].lead);
    *at++ = header->edges[e].line;
    *at++ = header->edges[e].rising ? 1u : 2u; /* polarity code: 1 rising, 2 falling */
  }
  ft_wire_put_u32(at, ft_wire_crc32c(out, frame_size - FT_WIRE_CRC_BYTES));
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
