from adapt.errors import InputError
def run(cfg):
    raise InputError(f"inputs={cfg.inputs}: not implemented yet")
