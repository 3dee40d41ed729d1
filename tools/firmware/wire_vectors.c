/*
 * wire_vectors.c - test driver for fringetally_wire.h: reads commands on stdin, one per line, and prints
 * one hex line per command, so the TypeScript tests can compare the C encoder with the shared vectors.
 *   crc HEXBYTES                                      -> CRC-32C as 8 hex digits (up to 4096 bytes)
 *   frame SEQ CHANNELS SPF FLAGS RATE TS COUNTER LAYOUT E S0 S1 ... [SAMPLE LEAD LINE RISING] x E
 *                                                     -> the frame in hex, or "error" when encoding refuses
 */
#include <stdio.h>
#include <string.h>

#include "fringetally_wire.h"

static uint8_t frame_buffer[FT_WIRE_MAX_FRAME_BYTES];
static int16_t sample_buffer[FT_WIRE_MAX_CHANNELS * FT_WIRE_MAX_SAMPLES_PER_FRAME];
static ft_wire_edge edge_buffer[FT_WIRE_MAX_EDGES_PER_FRAME + 1u];

static void print_hex(const uint8_t *bytes, size_t length) {
  size_t i;
  for (i = 0; i < length; i++) printf("%02x", bytes[i]);
  printf("\n");
}

static char hex_text[8193];

static int hex_digit(char c) {
  if (c >= '0' && c <= '9') return c - '0';
  if (c >= 'a' && c <= 'f') return c - 'a' + 10;
  if (c >= 'A' && c <= 'F') return c - 'A' + 10;
  return -1;
}

static int run_crc(void) {
  size_t length = 0, text_length, i;
  if (scanf("%8192s", hex_text) != 1) return 1;
  text_length = strlen(hex_text);
  if (text_length % 2u != 0u) return 1;
  for (i = 0; i < text_length; i += 2u) {
    int high = hex_digit(hex_text[i]), low = hex_digit(hex_text[i + 1u]);
    if (high < 0 || low < 0) return 1;
    frame_buffer[length++] = (uint8_t)(high * 16 + low);
  }
  printf("%08lx\n", (unsigned long)ft_wire_crc32c(frame_buffer, length));
  return 0;
}

static int run_frame(void) {
  unsigned long sequence, channels, samples_per_frame, flags, rate, timestamp, counter, layout, edges;
  unsigned long sample, lead, line, rising;
  ft_wire_header header;
  size_t count, i, size;
  long value;
  if (scanf("%lu %lu %lu %lu %lu %lu %lu %lu %lu", &sequence, &channels, &samples_per_frame, &flags, &rate, &timestamp,
            &counter, &layout, &edges) != 9) {
    return 1;
  }
  header.sequence = (uint16_t)sequence;
  header.channel_count = (uint8_t)channels;
  header.samples_per_frame = (uint16_t)samples_per_frame;
  header.flags = (uint8_t)flags;
  header.sample_rate_hz = (uint32_t)rate;
  header.timestamp_us = (uint32_t)timestamp;
  header.sample_counter = (uint32_t)counter;
  header.channel_layout = (uint32_t)layout;
  /* One record more than allowed may be read, so that the encoder is the one to refuse 257 edges. */
  if (edges > FT_WIRE_MAX_EDGES_PER_FRAME + 1u) return 1;
  header.edge_count = (uint16_t)edges;
  header.edges = edge_buffer;
  count = channels * samples_per_frame;
  if (count > sizeof sample_buffer / sizeof sample_buffer[0]) count = 0;
  for (i = 0; i < count; i++) {
    if (scanf("%ld", &value) != 1) return 1;
    sample_buffer[i] = (int16_t)value;
  }
  for (i = 0; i < edges; i++) {
    if (scanf("%lu %lu %lu %lu", &sample, &lead, &line, &rising) != 4) return 1;
    edge_buffer[i].sample = (uint16_t)sample;
    edge_buffer[i].lead = (uint16_t)lead;
    edge_buffer[i].line = (uint8_t)line;
    edge_buffer[i].rising = (uint8_t)rising;
  }
  size = ft_wire_encode(&header, sample_buffer, frame_buffer, sizeof frame_buffer);
  if (size == 0u) {
    printf("error\n");
    return 0;
  }
  print_hex(frame_buffer, size);
  return 0;
}

int main(void) {
  char command[16];
  while (scanf("%15s", command) == 1) {
    int failed;
    if (strcmp(command, "crc") == 0) failed = run_crc();
    else if (strcmp(command, "frame") == 0) failed = run_frame();
    else failed = 1;
    if (failed) {
      fprintf(stderr, "wire_vectors: cannot parse command \"%s\"\n", command);
      return 1;
    }
  }
  return 0;
}
