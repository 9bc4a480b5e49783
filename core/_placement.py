"""(in progress)"""

__all__ = []
