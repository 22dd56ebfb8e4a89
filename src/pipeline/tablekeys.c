/* tablekeys.c - the key columns the result tables share (tablekeys.h). */
#include "tablekeys.h"

#include "../io/bidsname.h"

void tablekeys_put(csvout *c, const char *localizer, const char *parcel, const char *split)
{
	char kind[128], part[128];

	bidsname_split_parts(split, kind, sizeof kind, part, sizeof part);
	csvout_str(c, localizer);
	csvout_str(c, parcel);
	csvout_str(c, split);
	csvout_str(c, kind);
	csvout_str(c, part);
}
