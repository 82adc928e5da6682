"""Data layer: campaign templates, spreadsheet import and validation.

Public API::

    load_campaign(path) -> Campaign          # raises DataError listing every error
    load_campaign(path, model=model)         # also checks names against a model
    check_campaign(path, model=None) -> CheckReport
    write_campaign(campaign, path)           # .xlsx workbook or CSV folder
    write_template(path), write_template_csv(folder), new_campaign(folder)
"""

from speciakin.data.campaign import (Campaign, CampaignRun, Compound, HplcData, SourceFile, TimeSeries,
                                     TitrantLog, mole_fractions_from_signals, resample)
from speciakin.data.importer import load_campaign
from speciakin.data.sheets import SHEETS
from speciakin.data.templates import new_campaign, write_template, write_template_csv
from speciakin.data.check import CheckReport, check_campaign
from speciakin.data.writer import write_campaign

__all__ = [
    "Campaign", "CampaignRun", "Compound", "HplcData", "SourceFile", "TimeSeries", "TitrantLog",
    "mole_fractions_from_signals", "resample", "load_campaign", "check_campaign", "CheckReport",
    "write_campaign", "write_template", "write_template_csv", "new_campaign", "SHEETS",
]
