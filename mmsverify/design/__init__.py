"""Design aids: is a manufactured solution able to catch mistakes, and is it admissible?"""
