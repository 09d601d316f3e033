"""Outlook stage: latest index values -> chance of each impact now and at each lag ahead."""

from impactlink.outlook.outlook import OUTLOOK_COLUMNS, impact_outlook, plot_outlook_map

__all__ = ["impact_outlook", "plot_outlook_map", "OUTLOOK_COLUMNS"]
