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

# The contact log (migration 0012; the CHECK constraints there hold the same lists).
# How a relative was reached or tried.
CONTACT_CHANNELS = ("letter", "phone", "in_clinic", "via_family", "other")
# Who made the contact: a clinic role (NULL when the information was passed on by a family member).
CONTACT_ROLES = ("nurse", "counsellor", "cardiologist", "other")
# What came of it.  The first six are what a user records; the last two exist only to keep, word for
# word, the single status stored before the log (revision 0009 and older) and a people file's
# contact_status column: "not_contacted" (noted as not yet contacted) and "lost_to_follow_up".
CONTACT_OUTCOMES = ("informed", "no_answer", "wrong_address", "declined", "contact_later", "moved_away",
                    "not_contacted", "lost_to_follow_up")  # fmt: skip
CONTACT_OUTCOMES_ENTERED = CONTACT_OUTCOMES[:6]
# Where an event came from: entered by a user, migrated from the old single status, or read from a
# people file's contact_status column.
CONTACT_SOURCES = ("entered", "migrated", "imported")
CONTACT_WISHES = ("no_further_contact", "only_via_family_member")
LETTER_KINDS = ("first_contact", "reminder", "result", "reclassification", "discharge", "appointment")
LETTER_SENT_TO = ("person", "via_family")
EXTERNAL_RESULT_KINDS = ("genetic_test", "screening")
# Phenotype found by a screening at another centre (the assessment's affected_status words).
EXTERNAL_PHENOTYPES = ("affected", "unaffected", "uncertain")
