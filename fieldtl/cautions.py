"""The cautions every command, page and report shows (one wording, used everywhere)."""

HEARING_CAUTION = ("Test signals and tapping machines reach sound levels that damage hearing: wear hearing "
                   "protection, keep other people out of the rooms, and raise the level gradually.")
INDICATIVE_CAUTION = ("Results are indicative unless produced under an accredited procedure; local building "
                      "codes and licensed practice decide whether a construction complies.")
CAUTIONS: tuple[str, ...] = (HEARING_CAUTION, INDICATIVE_CAUTION)
