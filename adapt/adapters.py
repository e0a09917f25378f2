PLACEHOLDER = 1
ADAPTERS = {"full": None, "lora": None, "embeddings": None, "top_layers": None}
