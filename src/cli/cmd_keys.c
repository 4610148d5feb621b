/* `jeansgrow keys`: every parameter key with its type, unit, default, range and meaning,
 * the keys of the scan group, then the rules that tie several keys together. */
#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"

static void print_key(const jg_param_doc *d, int markdown) {
  if (markdown)
    printf("| `%s` | %s | %s | %s | %s |\n", d->key, d->meaning, d->unit[0] ? d->unit : "-",
           d->default_text, d->allowed);
  else
    printf("%s\t%s\t%s\t%s\t%s\t%s\n", d->key, d->type, d->unit[0] ? d->unit : "-",
           d->default_text, d->allowed, d->meaning);
}

int cmd_keys(const cli_command *cmd, int argc, char **argv) {
  int markdown = 0;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--markdown") == 0) {
      markdown = 1;
    } else if (strcmp(argv[i], "-h") == 0 || strcmp(argv[i], "--help") == 0) {
      printf("Usage: jeansgrow keys [--markdown]\n\n%s.\n\n"
             "Options:\n  --markdown  print a Markdown table (as in the README)\n"
             "  -h, --help  show this help\n",
             cmd->summary);
      return EXIT_OK;
    } else {
      fprintf(stderr, "jeansgrow keys: unknown option '%s' (see jeansgrow keys --help)\n",
              argv[i]);
      return EXIT_BAD_INPUT;
    }
  }
  if (markdown) printf("| key | meaning | unit | default | allowed |\n|---|---|---|---|---|\n");
  else printf("# key\ttype\tunit\tdefault\tallowed\tmeaning\n");
  const jg_param_doc *d;
  for (int i = 0; (d = jg_param_doc_at(i)) != NULL; i++) print_key(d, markdown);
  if (markdown) printf("\n| scan key | meaning | unit | default | allowed |\n|---|---|---|---|---|\n");
  for (int i = 0; (d = jg_param_scan_doc_at(i)) != NULL; i++) print_key(d, markdown);
  if (markdown) printf("\n| combined rule | keys | why |\n|---|---|---|\n");
  else printf("\n# combined rule\tkeys\twhy\n");
  const jg_param_rule *r;
  for (int i = 0; (r = jg_param_rule_at(i)) != NULL; i++) {
    if (markdown) printf("| %s | `%s` | %s |\n", r->rule, r->keys, r->reason);
    else printf("%s\t%s\t%s\n", r->rule, r->keys, r->reason);
  }
  return EXIT_OK;
}
