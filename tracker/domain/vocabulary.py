"""The controlled words the store accepts, in one place.

The same lists appear as CHECK constraints in the migrations (a migration is
frozen history and does not import this module); a test checks they agree.
"""

SEX_AT_BIRTH = ("female", "male", "unknown")
VITAL_STATUS = ("alive", "deceased", "unknown")
TWIN_TYPE = ("monozygotic", "dizygotic", "unknown")
ADOPTION = ("in", "out")
CONTACT_STATUS = ("not_contacted", "contactable", "declined", "lost_to_follow_up")
AFFECTED_STATUS = ("affected", "unaffected", "uncertain")
ZYGOSITY = ("heterozygous", "homozygous", "hemizygous", "compound_heterozygous")

# ACMG/AMP 2015 five-tier classification (Richards et al., Genet Med 2015;17:405-424) [V].
ACMG_CLASSES = (
    "pathogenic",
    "likely_pathogenic",
    "uncertain_significance",
    "likely_benign",
    "benign",
)
ACMG_SHORT = {
    "pathogenic": "P",
    "likely_pathogenic": "LP",
    "uncertain_significance": "VUS",
    "likely_benign": "LB",
    "benign": "B",
}
ACTIONABLE_CLASSES = ("pathogenic", "likely_pathogenic")

TEST_TYPES = ("diagnostic_panel", "predictive")
TEST_RESULTS = ("carrier", "non_carrier", "inconclusive", "no_variant_found")
MODALITIES = ("echo", "cmr", "ecg", "clinic")

# Cause of death of a deceased person (person.death_cause; CHECK constraint of migration 0006).
# "sudden" is sudden death (cardiac or unexplained); the sudden-death logic reads this word.
DEATH_CAUSES = ("sudden", "cardiac_non_sudden", "non_cardiac", "unknown")
