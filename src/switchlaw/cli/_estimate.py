def over_limit(study):
    return None
