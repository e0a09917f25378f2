"""Every Hydra config of the tool. This folder ships inside the wheel as the package ``adapt.conf``."""
