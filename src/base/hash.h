/* Private: hashing, FNV-1a with 64 bits. It guards against torn lines,
 * tells scans apart and records which table a run read; it is not meant to
 * resist deliberate forgery. */
#ifndef JEANSGROW_SRC_HASH_H
#define JEANSGROW_SRC_HASH_H

#include <stddef.h>
#include <stdint.h>

#define JG__FNV_OFFSET 0xcbf29ce484222325ULL
static inline uint64_t jg__fnv1a(uint64_t h, const void *data, size_t n) {
  const unsigned char *p = data;
  for (size_t i = 0; i < n; i++) {
    h ^= p[i];
    h *= 0x100000001b3ULL;
  }
  return h;
}

#endif
