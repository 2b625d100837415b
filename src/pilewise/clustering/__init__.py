"""Clustering stage: k-means, Ward trees and their levels, choosing k, quality and stability."""
