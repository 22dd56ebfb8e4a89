/* tablekeys.h - the key columns the result tables share: localizer, parcel, split and its kind and part. */
#ifndef SR_TABLEKEYS_H
#define SR_TABLEKEYS_H

#include "../io/csvout.h"

/*
 * Writes the five key columns of a row: localizer, parcel, split, then the
 * split's kind and part (bidsname_split_parts: "odd-even:A" gives "odd-even"
 * and "A"), in the order every table's header and dictionary list them.
 */
void tablekeys_put(csvout *c, const char *localizer, const char *parcel, const char *split);

#endif
