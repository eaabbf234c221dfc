"""Pictures and the self-contained HTML page of the gap report and the allometry fit.

matplotlib loads only inside these functions, so importing bodyplan stays fast.
"""
