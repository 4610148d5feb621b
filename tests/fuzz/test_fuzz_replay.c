/*
 * Replays the parameter-loader fuzz inputs through the fuzz target's own
 * checks (tests/fuzz/fuzz_params.c) in every build, with or without clang:
 *   - tests/fuzz/regressions/: every input that once crashed the loader or
 *     broke one of its promises (tests/fuzz/regressions/README says what
 *     each one was);
 *   - tests/fuzz/corpus_params/: the seed corpus, good and bad files.
 * A broken promise aborts, which Criterion reports as a crash; the name of
 * the input being replayed is printed just before.
 */
#include <dirent.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <criterion/criterion.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static int is_input(const struct dirent *d) {
  return d->d_name[0] != '.' && strncmp(d->d_name, "README", 6) != 0;
}

static unsigned char *read_all(const char *path, size_t *size) {
  FILE *f = fopen(path, "rb");
  cr_assert(f != NULL, "cannot open %s", path);
  size_t cap = 4096, n = 0;
  unsigned char *buf = malloc(cap);
  cr_assert(buf != NULL);
  size_t got;
  while ((got = fread(buf + n, 1, cap - n, f)) > 0) {
    n += got;
    if (n == cap) {
      cap *= 2;
      buf = realloc(buf, cap);
      cr_assert(buf != NULL);
    }
  }
  cr_assert(!ferror(f), "cannot read %s", path);
  fclose(f);
  *size = n;
  return buf;
}

/* Replays every input of one folder; returns how many there were. */
static int replay_folder(const char *folder) {
  char dir[4096];
  snprintf(dir, sizeof dir, "%s/tests/fuzz/%s", JG_SOURCE_DIR, folder);
  struct dirent **names = NULL;
  int n = scandir(dir, &names, is_input, alphasort);
  cr_assert(n >= 0, "cannot list %s", dir);
  for (int i = 0; i < n; i++) {
    char path[8192];
    snprintf(path, sizeof path, "%s/%s", dir, names[i]->d_name);
    size_t size = 0;
    unsigned char *data = read_all(path, &size);
    fprintf(stderr, "replaying %s/%s\n", folder, names[i]->d_name);
    LLVMFuzzerTestOneInput(data, size);
    free(data);
    free(names[i]);
  }
  free(names);
  return n;
}

Test(fuzz_replay, every_saved_crash_input_now_keeps_the_loader_promises) {
  int n = replay_folder("regressions");
  cr_assert(n > 0, "tests/fuzz/regressions holds no input: the replay would check nothing");
}

/* 20: the seed corpus is the fuzzer's starting point and a readable list of
 * the cases it was given; fewer files would mean it was lost or truncated. */
Test(fuzz_replay, every_seed_input_keeps_the_loader_promises) {
  int n = replay_folder("corpus_params");
  cr_assert(n >= 20, "tests/fuzz/corpus_params holds %d inputs, expected at least 20", n);
}
