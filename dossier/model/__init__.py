"""The model: the Magic Formula equations and their fitting, with the fit statistics."""
