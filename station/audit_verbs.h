/* audit_verbs: `station audit stats`, `station audit report` and
 * `station audit export` — the audit's numbers, its HTML report and the CSV
 * of the records, each over the records a period and filter select.
 *
 * Each verb takes argv with the verb's name first (as `station audit` hands
 * it on), parses its options, reads the log without blocking a writer, and
 * returns an exit status of station/cli.h: 0 done, 3 (EXIT_ERROR) when the
 * log or an output file fails, 4 (EXIT_USAGE) for a wrong command line.
 * The figures come from station/audit_stats, the pages from
 * station/audit_report and station/audit_csv. */
#ifndef ST_AUDIT_VERBS_H
#define ST_AUDIT_VERBS_H

int audit_cmd_stats(int argc, char **argv);
int audit_cmd_report(int argc, char **argv);
int audit_cmd_export(int argc, char **argv);

#endif
