"""The document: one typed context, number formatting, the theme, the narrative, figures, the site
and the PDF volumes — every page as bytes, nothing written.
"""
