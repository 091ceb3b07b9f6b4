"""dossier: tire force-and-moment rig data in, a traceable evaluation dossier out."""

__version__ = "0.1.0"
