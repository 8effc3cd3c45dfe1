"""The cautions every command, page and report shows (one wording, used everywhere)."""

HEARING_CAUTION = ("Test signals and tapping machines reach sound levels that damage hearing: wear hearing "
                   "protection, keep other people out of the rooms, and raise the level gradually.")
INDICATIVE_CAUTION = ("Results are indicative unless produced under an accredited procedure; local building "
                      "codes and licensed practice decide whether a construction complies.")
CAUTIONS: tuple[str, ...] = (HEARING_CAUTION, INDICATIVE_CAUTION)
# Noise records for complaints (fieldtl.noise): shown by the record command, page and report.
NOISE_RECORD_CAUTION = ("A noise record documents what was measured for an adviser; it is not a legal determination "
                        "about anyone. Local rules and licensed practice decide; recording other people may be "
                        "regulated where you are.")
RECORDING_CAUTION = ("Audio clips capture neighbours and occupants: keep them only with the occupant's consent and "
                     "where local law allows recording; delete them when they are no longer needed.")
