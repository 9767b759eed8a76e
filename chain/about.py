"""What every output of ``chain`` carries: the version and the safety reminder.

A leaf module (it imports nothing of the package), so that the CLI, the
report renderers and the analysis record can all name it.
"""

__version__ = "0.1.0"

#: the one-line safety reminder printed by every report and the CLI help
SAFETY = ("Safety: tube amplifiers hold lethal voltages, also after switch-off; these numbers are model "
          "estimates, not measurements. Work on live equipment only if qualified, under local electrical codes.")

__all__ = ["__version__", "SAFETY"]
