/* The checks a lab's own files share (cutoff files, norms files): each row
 * names an index of the rule table, states its unit, which must be the
 * index's own, and gives a value within that unit's range. One code, so a
 * share of 0.3 cannot pass for 30 % in one file and be refused in another. */
#ifndef REMTONE_LAB_ROWS_H
#define REMTONE_LAB_ROWS_H

#include "remtone/score.h"
#include "table.h"

/* Checks the current row of t: id_text an index id (rt_index_rule_find),
 * the optional column t->columns[unit_col] present in the header and its
 * value (unit_text) the index's unit, value_text a number of column
 * value_name within 0 .. 100 (%), 0 .. 1 (ratio) or 0 .. 1e6 (/h). example
 * is a header and a row shown when the unit column is missing
 * ("\"index,cutoff,unit\" and \"sinbar.chin_any_3s,18.2,%\""). Returns the
 * rule (*id and *value set), or NULL after recording an error naming the
 * file and line (rt_table_fail, RT_ERR_STAGING). */
const rt_index_rule *rt_lab_row_check(rt_table *t, const char *id_text, int unit_col,
                                      const char *unit_text, const char *value_text,
                                      const char *value_name, const char *example,
                                      rt_index_id *id, double *value);

/* The largest value of an index counted in `unit`: 100 (%), 1 (ratio), 1e6 (others). */
double rt_lab_unit_max(const char *unit);

#endif
