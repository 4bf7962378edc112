/* strandecho: the safety cautions shown in every report. Sources are named in docs/safety.md. */
#include "strandecho/caution.h"

static const char *const se_caution_list[] = {
    "Tensioned lines store energy and snap back: keep everyone out of the line of a tensioned member "
    "and treat the whole working area as a snap-back zone (OCIMF, The Hazards of Snap-back, 2015; UK "
    "MCA, Code of Safe Working Practices for Merchant Seafarers).",
    "Electrical cables: de-energise, isolate, test for absence of voltage, earth all conductors, lock "
    "out and tag out before connecting test equipment; cables hold charge after high-voltage tests "
    "(OSHA 29 CFR 1910.147 and 1910.269, NFPA 70E).",
    "Offshore work: permit to work, exclusion zones while lines are tensioned, weather windows, diver "
    "or ROV coordination.",
    "A located reflection is an indication, not an inspection: confirm it by direct inspection before "
    "acting on it. Local codes and licensed practice take precedence over this report.",
};

const char *se_caution_line(int electrical)
{
    if (electrical)
        return "Caution: de-energise, isolate, prove dead, earth and lock out a cable before testing; "
               "a reflection is an indication: confirm by inspection; local codes and licensed practice "
               "prevail.";
    return "Caution: tensioned lines snap back: keep clear of the line of tension; a reflection is an "
           "indication: confirm by inspection; local codes and licensed practice prevail.";
}

const char *const *se_cautions(size_t *count)
{
    if (count != 0)
        *count = sizeof se_caution_list / sizeof se_caution_list[0];
    return se_caution_list;
}
