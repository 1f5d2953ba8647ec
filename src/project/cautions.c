/* The wording of the projection cautions. */
#include "project/cautions.h"

static const char *const cautions[] = {
    "These are model-based probabilities, computed under the assumptions of the model they come from: "
    "its form of growth and density dependence, year-to-year variation of the size it estimated, and "
    "conditions that stay as they were during the survey years. Other models or changed conditions give "
    "other numbers.",
    "They are not a formal status listing or conservation assessment of the population.",
    "Defer to the criteria of the responsible authority and to qualified practitioners for any listing, "
    "management or conservation decision.",
};

size_t tf_project_n_cautions(void)
{
    return sizeof cautions / sizeof cautions[0];
}

const char *tf_project_caution(size_t i)
{
    return i < tf_project_n_cautions() ? cautions[i] : 0;
}

const char *tf_project_caution_fixed(void)
{
    return "The parameters were fixed by hand, not estimated: uncertainty about them is not included, so "
           "the spread of outcomes is narrower than a fitted model's would be.";
}

const char *tf_project_caution_start(void)
{
    return "The current abundance was set by hand, not estimated: every future starts from it, so the "
           "uncertainty about today's abundance is not included (the uncertainty about the parameters is).";
}
